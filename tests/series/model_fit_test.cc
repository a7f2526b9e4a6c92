#include "series/model_fit.h"

#include <bit>
#include <cmath>
#include <cstdint>
#include <utility>

#include <catch2/catch.hpp>

#include "core/bulk_memory.h"

using namespace tallyd;

namespace {

bool same_bits(double a, double b) { return std::bit_cast<std::uint64_t>(a) == std::bit_cast<std::uint64_t>(b); }

// A fit result of p coefficients with values that use every bit (not a fit
// of anything: the storage is under test).
glm::FitResult made_up_result(Eigen::Index p) {
  glm::FitResult r;
  r.status = glm::FitStatus::ok;
  r.note = "column(s) 2 aliased and dropped";
  r.coefficients.resize(p);
  r.covariance.resize(p, p);
  r.aliased.assign(static_cast<std::size_t>(p), false);
  for (Eigen::Index i = 0; i < p; ++i) {
    r.coefficients(i) = 1.0 / (3.0 + static_cast<double>(i));
    for (Eigen::Index j = 0; j < p; ++j) r.covariance(i, j) = 1.0 / (7.0 + static_cast<double>(i + 2 * j));
  }
  if (p > 2) r.aliased[2] = true;
  r.dispersion = 1.7;
  r.theta = 12.5;
  r.df_residual = 140;
  r.n = 148;
  return r;
}

void check_same(const ModelFit& f, const glm::FitResult& r) {
  CHECK(f.status == r.status);
  CHECK(f.note == r.note);
  CHECK(f.dispersion == r.dispersion);
  CHECK(f.df_residual == r.df_residual);
  REQUIRE(f.coefficients().size() == r.coefficients.size());
  REQUIRE(f.covariance().rows() == r.covariance.rows());
  REQUIRE(f.covariance().cols() == r.covariance.cols());
  REQUIRE(f.aliased_count() == r.aliased.size());
  for (Eigen::Index i = 0; i < r.coefficients.size(); ++i) CHECK(same_bits(f.coefficients()(i), r.coefficients(i)));
  for (Eigen::Index j = 0; j < r.covariance.cols(); ++j)
    for (Eigen::Index i = 0; i < r.covariance.rows(); ++i) CHECK(same_bits(f.covariance()(i, j), r.covariance(i, j)));
  for (std::size_t i = 0; i < r.aliased.size(); ++i) CHECK(f.aliased(i) == r.aliased[i]);
}

}  // namespace

TEST_CASE("a model fit holds a fit result's figures and arrays exactly", "[series][model_fit]") {
  ModelFit empty;
  CHECK(empty.coefficients().size() == 0);
  CHECK(empty.covariance().size() == 0);
  CHECK(empty.aliased_count() == 0);
  for (Eigen::Index p : {1, 3, 8, 17}) {
    INFO("p " << p);
    const glm::FitResult r = made_up_result(p);
    ModelFit f;
    f.assign(r);
    check_same(f, r);
    const glm::FitResult back = f.result();
    check_same(f, back);
    // Both arrays start 16-byte aligned, as the maps declare.
    CHECK(reinterpret_cast<std::uintptr_t>(f.coefficients().data()) % 16 == 0);
    CHECK(reinterpret_cast<std::uintptr_t>(f.covariance().data()) % 16 == 0);
    // A copy has arrays of its own; a move takes them.
    ModelFit copy = f;
    check_same(copy, r);
    CHECK(copy.coefficients().data() != f.coefficients().data());
    copy.coefficients()(0) = 99;
    CHECK(f.coefficients()(0) == r.coefficients(0));
    const double* arrays = f.coefficients().data();
    ModelFit moved = std::move(f);
    CHECK(moved.coefficients().data() == arrays);
    check_same(moved, r);
    // A later fit of the same shapes reuses the block.
    glm::FitResult next = made_up_result(p);
    next.coefficients *= 2.0;
    moved.assign(next);
    CHECK(moved.coefficients().data() == arrays);
    check_same(moved, next);
  }
}

// What predict and the steps compute with the fit: Eigen's dot product and
// matrix-vector product on the maps must give the bits they give on a
// glm::FitResult's VectorXd and MatrixXd (the kernels Eigen picks depend on
// the alignment the types declare).
TEST_CASE("products with a model fit's arrays give the bits of a fit result's", "[series][model_fit]") {
  for (Eigen::Index p : {1, 2, 5, 8, 13}) {
    INFO("p " << p);
    const glm::FitResult r = made_up_result(p);
    ModelFit f;
    f.assign(r);
    Eigen::RowVectorXd x(p);
    for (Eigen::Index i = 0; i < p; ++i) x(i) = std::sin(1.0 + static_cast<double>(i)) * 3.1;
    CHECK(same_bits(x.dot(f.coefficients()), x.dot(r.coefficients)));
    const Eigen::VectorXd mapped = f.covariance() * x.transpose();
    const Eigen::VectorXd plain = r.covariance * x.transpose();
    for (Eigen::Index i = 0; i < p; ++i) CHECK(same_bits(mapped(i), plain(i)));
  }
}

TEST_CASE("a model fit shaped in offered memory is placed there and keeps its values", "[series][model_fit]") {
  const std::shared_ptr<BulkMemory> bulk = BulkMemory::create(1 << 20);
  REQUIRE(bulk != nullptr);
  ModelFit f;
  REQUIRE(f.shape(8, 8, 8, 8, bulk.get()));
  // 8 coefficients, 64 covariances and 8 flags (one double's worth).
  CHECK(bulk->used() == (8 + 64 + 1) * sizeof(double));
  const glm::FitResult r = made_up_result(8);
  for (Eigen::Index i = 0; i < 8; ++i) f.coefficients()(i) = r.coefficients(i);
  for (std::size_t i = 0; i < 8; ++i) f.set_aliased(i, r.aliased[i]);
  f.covariance() = r.covariance;
  static_cast<glm::FitFigures&>(f) = r;
  check_same(f, r);
  // A refit of the same shapes stays in the placed block.
  const double* placed = f.coefficients().data();
  f.assign(r);
  CHECK(f.coefficients().data() == placed);
  // Other shapes: a heap block, keeping the coefficients and flags.
  CHECK_FALSE(f.shape(8, 3, 8, 8, nullptr));
  CHECK(f.coefficients().data() != placed);
  CHECK(f.aliased_count() == 3);
  CHECK(f.aliased(2));
  for (Eigen::Index i = 0; i < 8; ++i) CHECK(same_bits(f.coefficients()(i), r.coefficients(i)));
  // A mapping that is full: the heap.
  const std::shared_ptr<BulkMemory> small = BulkMemory::create(64);
  small->trim();
  ModelFit g;
  CHECK_FALSE(g.shape(4, 4, 4, 4, small.get()));
  CHECK(g.coefficients().size() == 4);
  CHECK(g.coefficients()(3) == 0.0);
}
