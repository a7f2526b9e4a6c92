#include "glm/factor_inverse.h"

#include <Eigen/Dense>
#include <catch2/catch.hpp>

#include "bounds/random.h"

using tallyd::glm::scaled_inverse_from_factor;

namespace {

// A symmetric positive definite p x p matrix: B'B plus p on the diagonal.
Eigen::MatrixXd spd(int p, tallyd::bounds::Rng& rng) {
  Eigen::MatrixXd b(p + 3, p);
  for (int i = 0; i < b.rows(); ++i) {
    for (int j = 0; j < p; ++j) b(i, j) = rng.uniform() - 0.5;
  }
  Eigen::MatrixXd a = b.transpose() * b;
  a.diagonal().array() += 0.1 * p;
  return a;
}

}  // namespace

TEST_CASE("scaled inverse from a Cholesky factor: Eigen's inverse, and the unrolled sizes bit for bit the loops",
          "[glm]") {
  // Reference: Eigen's LLT and inverse (a general-purpose linear algebra
  // library). Sizes 1-8 take the unrolled path, 9-11 the general loops;
  // the unrolled path must equal the loops exactly, since replays compare
  // alerts across builds and settings byte for byte.
  tallyd::bounds::Rng rng(29);
  for (int p = 1; p <= 11; ++p) {
    const Eigen::MatrixXd a = spd(p, rng);
    const Eigen::LLT<Eigen::MatrixXd> llt(a);
    REQUIRE(llt.info() == Eigen::Success);
    const Eigen::MatrixXd l = llt.matrixL();
    const auto lower = [&l](Eigen::Index i, Eigen::Index j) { return l(i, j); };
    Eigen::MatrixXd out;
    scaled_inverse_from_factor(lower, p, 1.75, out);
    REQUIRE(out.rows() == p);
    REQUIRE(out.cols() == p);
    const Eigen::MatrixXd want = 1.75 * a.inverse();
    for (int i = 0; i < p; ++i) {
      for (int j = 0; j < p; ++j) CHECK(out(i, j) == Approx(want(i, j)).epsilon(1e-10).margin(1e-12));
    }
    Eigen::MatrixXd loops(p, p);
    tallyd::glm::detail::scaled_inverse_loops(lower, p, 1.75, loops);
    CHECK((out.array() == loops.array()).all());
  }
}
