#include "series/refit_work.h"

#include <algorithm>
#include <cmath>

#include <catch2/catch.hpp>

#include "bounds/random.h"

using namespace tallyd;

namespace {

// A year of daily records as series/design.h lays them out (intercept,
// trend, annual and weekly harmonic pair), Poisson counts drawn around a
// seasonal mean of about `level` with an outbreak at 4x every 41st day.
void fill_window(RefitWork& work, double level, std::uint64_t seed) {
  const int n = 365;
  work.X.resize(n, 6);
  work.y.resize(n);
  work.offset.resize(n);
  work.weights = Eigen::VectorXd::Ones(n);
  bounds::Rng rng(seed);
  for (int i = 0; i < n; ++i) {
    const double year = 2 * M_PI * i / 365.25, week = 2 * M_PI * i / 7.0;
    work.X.row(i) << 1.0, i / 365.25, std::sin(year), std::cos(year), std::sin(week), std::cos(week);
    const double exposure = 0.5 + 0.01 * (i % 100);
    work.offset(i) = std::log(exposure);
    const double mean = exposure * level * std::exp(0.4 * std::sin(year)) * (i % 41 == 20 ? 4 : 1);
    work.y(i) = static_cast<double>(rng.poisson(mean));
  }
  work.ready();
}

// The resistant weights by their definition (Farrington et al. 1996, as
// series/refit_work.h states it), every record's Anscombe residual computed
// with its cube roots: the reference for the shortcut that skips them.
Eigen::VectorXd weights_by_definition(const ModelSpec& spec, const RefitWork& work,
                                      const glm::FitResult& fit) {
  const double phi = spec.family == glm::Family::quasipoisson ? fit.dispersion : 1.0;
  const bool nb = spec.family == glm::Family::negbin;
  Eigen::VectorXd eta = work.X * fit.coefficients;
  eta += work.offset;
  const Eigen::MatrixXd xc = work.X * fit.covariance;
  const Eigen::VectorXd quadratic = xc.cwiseProduct(work.X).rowwise().sum();
  Eigen::VectorXd w = work.weights;
  bool any = false;
  for (Eigen::Index i = 0; i < w.size(); ++i) {
    const double mu = std::exp(eta(i));
    const double y = work.y(i);
    const double variance = nb ? mu + mu * mu / fit.theta : mu;
    const double h = std::clamp(work.weights(i) * mu * mu / variance * quadratic(i) / phi, 0.0, 0.99);
    const double mu23 = std::cbrt(mu * mu);
    const double anscombe = 1.5 * (std::cbrt(y * y) - mu23) / std::sqrt(std::sqrt(mu23));
    const double index = nb ? 1 + mu / fit.theta : phi;
    const double s = anscombe / std::sqrt(index * (1 - h));
    if (s > spec.reweight_threshold) {
      w(i) = work.weights(i) / (s * s);
      any = true;
    }
  }
  if (!any) return {};
  w *= work.weights.sum() / w.sum();
  return w;
}

}  // namespace

TEST_CASE("resistant weights skip only cube roots that cannot change a weight", "[series]") {
  for (const glm::Family family : {glm::Family::quasipoisson, glm::Family::negbin}) {
    for (const double threshold : {1.0, 2.58}) {
      for (const double level : {0.8, 6.0, 40.0}) {
        INFO("family " << glm::to_string(family) << " threshold " << threshold << " level " << level);
        ModelSpec spec;
        spec.family = family;
        spec.reweight_threshold = threshold;
        RefitWork work;
        fill_window(work, level, 11);
        glm::FitOptions options;
        options.family = family;
        options.null_deviance = false;
        const glm::FitResult fit =
            glm::fit_glm(work.X, work.y, work.offset, work.weights, options, nullptr, true);
        REQUIRE(fit.status == glm::FitStatus::ok);
        const Eigen::VectorXd expected = weights_by_definition(spec, work, fit);
        const Eigen::VectorXd got = resistant_weights(spec, work, fit);
        REQUIRE(got.size() == expected.size());
        REQUIRE(got.size() > 0);  // the outbreak days are down-weighted
        int down = 0;
        for (Eigen::Index i = 0; i < got.size(); ++i) {
          CHECK(got(i) == Approx(expected(i)).epsilon(1e-13));
          down += expected(i) < 1 ? 1 : 0;
        }
        CHECK(down >= 1);
      }
    }
  }
}

// The refit's fits go through glm::SmallFit where it applies and fit_glm
// otherwise; either way the result is fit_glm's (to rounding), and the
// resistant pass's weights and correction do not depend on which path ran.
TEST_CASE("a refit's fits through the fast path give fit_glm's results", "[series]") {
  ModelSpec spec;
  spec.family = glm::Family::quasipoisson;
  RefitWork work;
  fill_window(work, 6.0, 5);
  glm::FitOptions options;
  options.family = spec.family;
  options.null_deviance = false;
  Eigen::VectorXd start = Eigen::VectorXd::Zero(6);
  start(0) = std::log(6.0);
  const glm::FitResult fast = fit_window(work, work.weights, options, &start);
  REQUIRE(work.small.estimate_at(fast.coefficients));  // the fast path served it
  const glm::FitResult ref =
      glm::fit_glm(work.X, work.y, work.offset, work.weights, options, &start, true);
  REQUIRE(ref.status == glm::FitStatus::ok);
  const double largest = ref.coefficients.cwiseAbs().maxCoeff();
  for (Eigen::Index j = 0; j < 6; ++j)
    CHECK(std::abs(fast.coefficients(j) - ref.coefficients(j)) <= 1e-10 * largest);
  CHECK(fast.dispersion == Approx(ref.dispersion).epsilon(1e-10));

  const Eigen::VectorXd w_fast = resistant_weights(spec, work, fast);
  const Eigen::VectorXd w_ref = resistant_weights(spec, work, ref);
  REQUIRE(w_fast.size() == w_ref.size());
  REQUIRE(w_fast.size() > 0);
  for (Eigen::Index i = 0; i < w_ref.size(); ++i) CHECK(w_fast(i) == Approx(w_ref(i)).epsilon(1e-9));

  glm::FitResult second = fit_window(work, w_fast, options, &fast.coefficients);
  const glm::FitResult second_ref =
      glm::fit_glm(work.X, work.y, work.offset, w_fast, options, &fast.coefficients, true);
  CHECK(second.iterations == second_ref.iterations);
  CHECK(second.dispersion == Approx(second_ref.dispersion).epsilon(1e-10));
  glm::FitResult corrected_ref = second_ref;
  correct_resistant_fit(spec, work, second);
  correct_resistant_fit(spec, work, corrected_ref);
  CHECK(second.dispersion == Approx(corrected_ref.dispersion).epsilon(1e-10));
  CHECK(second.dispersion > second_ref.dispersion);  // divided by a shrinkage factor below 1
}

// Without a warm start, or for a family the fast path does not serve, the
// fit is fit_glm's own, bit for bit.
TEST_CASE("a refit without a warm start, or of negbin, is fit_glm's", "[series]") {
  RefitWork work;
  fill_window(work, 3.0, 9);
  for (const glm::Family family : {glm::Family::quasipoisson, glm::Family::negbin}) {
    glm::FitOptions options;
    options.family = family;
    options.null_deviance = false;
    Eigen::VectorXd start = Eigen::VectorXd::Zero(6);
    start(0) = 1.0;
    const Eigen::VectorXd* starts[2] = {nullptr, &start};
    for (const Eigen::VectorXd* s : starts) {
      if (family == glm::Family::quasipoisson && s != nullptr) continue;  // the fast path's case
      const glm::FitResult got = fit_window(work, work.weights, options, s);
      const glm::FitResult ref =
          glm::fit_glm(work.X, work.y, work.offset, work.weights, options, s, true);
      CHECK(got.coefficients == ref.coefficients);
      CHECK(got.covariance == ref.covariance);
      CHECK(got.iterations == ref.iterations);
      CHECK(got.note == ref.note);
    }
  }
}
