#include "glm/small_fit.h"

#include <algorithm>
#include <cmath>
#include <limits>

#include <catch2/catch.hpp>

#include "glm/wls.h"

// The fast path is checked against fit_glm, which tests/glm/reference_test.cc
// checks against R's glm and MASS's glm.nb; tests/glm/reference_test.cc also
// runs the fast path itself on Dobson's counts against R.
namespace {

using tallyd::glm::Family;
using tallyd::glm::FitOptions;
using tallyd::glm::FitResult;
using tallyd::glm::FitStatus;
using tallyd::glm::Link;
using tallyd::glm::SmallFit;

// Agreement asked of the two paths: the same iterations, sums taken in
// another order.
constexpr double kRel = 1e-10;

bool close(double a, double b, double rel = kRel) {
  return std::abs(a - b) <= rel * std::max({std::abs(a), std::abs(b), 1e-300});
}

// A daily design as series/design.h builds it, cut to `p` columns:
// intercept, trend in years, annual and weekly harmonic pairs, then a
// covariate that is a slow wave (columns beyond the harmonics).
Eigen::MatrixXd daily_design(int n, int p) {
  Eigen::MatrixXd X(n, p);
  for (int i = 0; i < n; ++i) {
    const double year = 2 * M_PI * i / 365.25, week = 2 * M_PI * i / 7.0;
    const double all[8] = {1.0,
                           0.3 + i / 365.25,
                           std::sin(year),
                           std::cos(year),
                           std::sin(week),
                           std::cos(week),
                           std::sin(2 * week),
                           0.5 + 0.5 * std::sin(0.013 * i)};
    for (int j = 0; j < p; ++j) X(i, j) = all[j];
  }
  return X;
}

// Invented counts around a seasonal mean with exposure; overdispersed when
// `spread` > 0 (a deterministic multiplicative wobble), a few outbreak-like
// records when `spikes`.
void counts(const Eigen::MatrixXd& X, double level, double spread, bool spikes,
            Eigen::VectorXd& y, Eigen::VectorXd& offset) {
  const Eigen::Index n = X.rows();
  y.resize(n);
  offset.resize(n);
  for (Eigen::Index i = 0; i < n; ++i) {
    const double exposure = 0.5 + 0.5 * (0.5 + 0.5 * std::sin(1.7 * static_cast<double>(i)));
    offset(i) = std::log(exposure);
    const double season = X.cols() > 2 ? 0.5 * X(i, 2) : 0.0;
    const double wobble = 1 + spread * std::sin(2.3 * static_cast<double>(i) + 0.4);
    double mean = exposure * std::exp(level + season) * wobble;
    if (spikes && i % 53 == 17) mean *= 4;
    y(i) = std::floor(mean + 0.5 * std::sin(0.9 * static_cast<double>(i)) + 0.5);
    if (y(i) < 0) y(i) = 0;
  }
}

FitOptions options_for(Family family) {
  FitOptions o;
  o.family = family;
  o.link = Link::log;
  o.null_deviance = false;
  return o;
}

void check_same(const FitResult& fast, const FitResult& ref) {
  INFO("reference note: " << ref.note);
  REQUIRE(ref.status == FitStatus::ok);
  REQUIRE(fast.status == FitStatus::ok);
  CHECK(fast.iterations == ref.iterations);
  CHECK(fast.rank == ref.rank);
  CHECK(fast.n == ref.n);
  CHECK(fast.df_residual == ref.df_residual);
  CHECK(fast.aliased == ref.aliased);
  CHECK(fast.note.empty());
  const double largest = ref.coefficients.cwiseAbs().maxCoeff();
  for (Eigen::Index j = 0; j < ref.coefficients.size(); ++j) {
    INFO("column " << j << ": fast " << fast.coefficients(j) << " fit_glm " << ref.coefficients(j)
                    << " difference " << fast.coefficients(j) - ref.coefficients(j));
    // Relative to the largest coefficient: a coefficient near 0 carries the
    // rounding of the whole solve (the design's condition number times the
    // unit roundoff times the intercept), as any two solvers would differ.
    CHECK(std::abs(fast.coefficients(j) - ref.coefficients(j)) <= kRel * largest);
    for (Eigen::Index k = 0; k < ref.coefficients.size(); ++k) {
      INFO("covariance (" << j << ", " << k << "): " << fast.covariance(j, k) << " vs "
                          << ref.covariance(j, k));
      // Off-diagonal entries near 0 are compared on the scale of the diagonal.
      const double scale = std::sqrt(ref.covariance(j, j) * ref.covariance(k, k));
      CHECK(std::abs(fast.covariance(j, k) - ref.covariance(j, k)) <= 1e-9 * scale);
    }
  }
  CHECK(close(fast.deviance, ref.deviance));
  CHECK(close(fast.dispersion, ref.dispersion));
  CHECK(std::isnan(fast.null_deviance));
  if (std::isnan(ref.aic)) {
    CHECK(std::isnan(fast.aic));
    CHECK(std::isnan(fast.log_likelihood));
  } else {
    CHECK(close(fast.aic, ref.aic));
    CHECK(close(fast.log_likelihood, ref.log_likelihood));
  }
  CHECK(std::isinf(fast.theta));
}

// The fast path on the design `small` uses, from `start`: it must accept the
// fit and agree with fit_glm's from the same start (check_same).
FitResult fast_as_fit_glm(SmallFit& small, const Eigen::MatrixXd& X, const Eigen::VectorXd& y,
                          const Eigen::VectorXd& offset, const Eigen::VectorXd& w, const FitOptions& o,
                          const Eigen::VectorXd& start) {
  const FitResult ref = tallyd::glm::fit_glm(X, y, offset, w, o, &start, true);
  FitResult fast;
  REQUIRE(small.fit(w, o, start, fast));
  check_same(fast, ref);
  return fast;
}

}  // namespace

TEST_CASE("the small-p fit agrees with fit_glm from warm starts", "[glm]") {
  for (const Family family : {Family::poisson, Family::quasipoisson}) {
    for (int p = 1; p <= SmallFit::kMaxColumns; ++p) {
      for (const double level : {-0.5, 1.5, 4.0}) {
        for (const bool spikes : {false, true}) {
          const int n = 120 + 40 * p;
          const Eigen::MatrixXd X = daily_design(n, p);
          Eigen::VectorXd y, offset;
          counts(X, level, family == Family::quasipoisson ? 0.4 : 0.0, spikes, y, offset);
          const Eigen::VectorXd w = Eigen::VectorXd::Ones(n);
          const FitOptions o = options_for(family);
          // A start near the estimate (the previous refit's) and one far off.
          Eigen::VectorXd near = Eigen::VectorXd::Zero(p);
          near(0) = level + 0.05;
          Eigen::VectorXd far = Eigen::VectorXd::Zero(p);
          far(0) = level - 1.5;
          for (const Eigen::VectorXd& start : {near, far}) {
            INFO("family " << to_string(family) << " p " << p << " level " << level
                           << " spikes " << spikes << " start " << start(0));
            SmallFit small;
            small.use(X, y, offset);
            const FitResult fast = fast_as_fit_glm(small, X, y, offset, w, o, start);
            CHECK(small.estimate_at(fast.coefficients));
            for (Eigen::Index i = 0; i < n; ++i) {
              const double eta = X.row(i).dot(fast.coefficients) + offset(i);
              CHECK(std::abs(small.eta()(i) - eta) <= 1e-12 * (1 + std::abs(eta)));
              CHECK(close(small.mu()(i), std::exp(eta), 1e-11));
            }
          }
        }
      }
    }
  }
}

// A young series' window as series/design.h builds it a few weeks after its
// first record: intercept, trend in years since that record, the annual
// pair and the weekly pair. Over 30-60 days the annual pair is nearly a
// line and a parabola in time, so the columns fail the normal equations'
// bounds and fit_glm steps by the QR (glm/wls.h); the fast path must too.
TEST_CASE("the small-p fit agrees with fit_glm on young windows that need the QR", "[glm]") {
  for (const int n : {30, 45, 59}) {
    for (const double first_day : {10.0, 200.0}) {
      Eigen::MatrixXd X(n, 6);
      for (int i = 0; i < n; ++i) {
        const double day = first_day + i;
        const double year = 2 * M_PI * day / 365.25, week = 2 * M_PI * day / 7.0;
        X.row(i) << 1.0, i / 365.25, std::sin(year), std::cos(year), std::sin(week), std::cos(week);
      }
      // The design itself needs the QR: the normal equations decline it.
      tallyd::glm::WeightedLeastSquares wls;
      REQUIRE(wls.solve(X, Eigen::VectorXd::Zero(n), Eigen::VectorXd::Ones(n), 1e-9) == 6);
      REQUIRE_FALSE(wls.used_normal_equations());
      for (const Family family : {Family::poisson, Family::quasipoisson}) {
        for (const bool spikes : {false, true}) {
          Eigen::VectorXd y, offset;
          counts(X, 1.5, family == Family::quasipoisson ? 0.4 : 0.0, spikes, y, offset);
          const FitOptions o = options_for(family);
          Eigen::VectorXd w = Eigen::VectorXd::Ones(n);
          Eigen::VectorXd start = Eigen::VectorXd::Zero(6);
          start(0) = 1.6;
          INFO("n " << n << " first day " << first_day << " family " << to_string(family)
                    << " spikes " << spikes);
          SmallFit small;
          small.use(X, y, offset);
          const FitResult fast = fast_as_fit_glm(small, X, y, offset, w, o, start);
          // The resistant second fit's pattern on the same window.
          w(n / 3) = 0.2;
          w *= static_cast<double>(n) / w.sum();
          const Eigen::VectorXd from = fast.coefficients;
          fast_as_fit_glm(small, X, y, offset, w, o, from);
        }
      }
    }
  }
}

// The resistant refit's pattern (series/series_model.cc): a second fit with
// new prior weights from the first fit's estimate, whose means the fast
// path reuses.
TEST_CASE("a refit with new weights from the last estimate agrees with fit_glm", "[glm]") {
  const int n = 365;
  const Eigen::MatrixXd X = daily_design(n, 6);
  Eigen::VectorXd y, offset;
  counts(X, 2.0, 0.3, true, y, offset);
  const Eigen::VectorXd ones = Eigen::VectorXd::Ones(n);
  const FitOptions o = options_for(Family::quasipoisson);
  Eigen::VectorXd start = Eigen::VectorXd::Zero(6);
  start(0) = 2.1;
  SmallFit small;
  small.use(X, y, offset);
  FitResult first;
  REQUIRE(small.fit(ones, o, start, first));
  Eigen::VectorXd weights = ones;
  for (Eigen::Index i = 17; i < n; i += 53) weights(i) = 0.1;
  weights *= static_cast<double>(n) / weights.sum();
  const Eigen::VectorXd from = first.coefficients;
  const FitResult ref = tallyd::glm::fit_glm(X, y, offset, weights, o, &from, true);
  FitResult second;
  REQUIRE(small.estimate_at(from));
  REQUIRE(small.fit(weights, o, from, second));
  check_same(second, ref);
}

// Every case the fast path must leave to fit_glm: it returns false, so the
// caller's fit_glm decides (tests/glm/fit_test.cc and fit_edge_test.cc check
// what fit_glm then says).
TEST_CASE("the small-p fit declines what only fit_glm decides", "[glm]") {
  const int n = 200;
  const Eigen::MatrixXd X = daily_design(n, 4);
  Eigen::VectorXd y, offset;
  counts(X, 1.0, 0.0, false, y, offset);
  const Eigen::VectorXd w = Eigen::VectorXd::Ones(n);
  const Eigen::VectorXd start = Eigen::VectorXd::Zero(4);
  FitResult out;

  SECTION("families, links, widths and options it does not serve") {
    FitOptions o = options_for(Family::negbin);
    CHECK_FALSE(SmallFit::applies(o, 4));
    for (const Link link : {Link::sqrt, Link::identity}) {
      o = options_for(Family::poisson);
      o.link = link;
      CHECK_FALSE(SmallFit::applies(o, 4));
    }
    o = options_for(Family::poisson);
    CHECK(SmallFit::applies(o, 4));
    CHECK_FALSE(SmallFit::applies(o, SmallFit::kMaxColumns + 1));
    o.null_deviance = true;
    CHECK_FALSE(SmallFit::applies(o, 4));
    o = options_for(Family::poisson);
    o.alias_tolerance = 1e-2;  // above the normal equations' bound: the QR must decide
    CHECK_FALSE(SmallFit::applies(o, 4));
    SmallFit small;
    small.use(X, y, offset);
    CHECK_FALSE(small.fit(w, options_for(Family::negbin), start, out));
  }
  SECTION("a start with unusable means") {
    SmallFit small;
    small.use(X, y, offset);
    Eigen::VectorXd huge = start;
    huge(0) = 800;  // exp overflows: fit_glm restarts from y + 0.1
    CHECK_FALSE(small.fit(w, options_for(Family::poisson), huge, out));
    Eigen::VectorXd bad = start;
    bad(1) = std::numeric_limits<double>::quiet_NaN();
    CHECK_FALSE(small.fit(w, options_for(Family::poisson), bad, out));
  }
  SECTION("records fit_glm would leave out, and all-zero counts") {
    SmallFit small;
    small.use(X, y, offset);
    Eigen::VectorXd some_zero = w;
    some_zero(3) = 0;
    CHECK_FALSE(small.fit(some_zero, options_for(Family::poisson), start, out));
    Eigen::VectorXd y_bad = y;
    y_bad(5) = -1;
    small.use(X, y_bad, offset);
    CHECK_FALSE(small.fit(w, options_for(Family::poisson), start, out));
    const Eigen::VectorXd zeros = Eigen::VectorXd::Zero(n);
    small.use(X, zeros, offset);
    CHECK_FALSE(small.fit(w, options_for(Family::poisson), start, out));
  }
  SECTION("an aliased column, which the QR sets aside") {
    Eigen::MatrixXd Xd(n, 5);
    Xd << X, X.col(2);
    const Eigen::VectorXd start5 = Eigen::VectorXd::Zero(5);
    SmallFit small;
    small.use(Xd, y, offset);
    CHECK_FALSE(small.fit(w, options_for(Family::poisson), start5, out));
    const FitResult ref = tallyd::glm::fit_glm(Xd, y, offset, w, options_for(Family::poisson),
                                               &start5, true);
    CHECK(ref.aliased[4]);
  }
  SECTION("a mean running off to 0 (an MLE at infinity)") {
    // A dummy column on records whose counts are all 0.
    Eigen::MatrixXd Xz(n, 5);
    Eigen::VectorXd yz = y;
    for (int i = 0; i < n; ++i) {
      Xz.row(i) << X.row(i), i < 20 ? 1.0 : 0.0;
      if (i < 20) yz(i) = 0;
    }
    const Eigen::VectorXd start5 = Eigen::VectorXd::Zero(5);
    const FitResult ref = tallyd::glm::fit_glm(Xz, yz, offset, w, options_for(Family::poisson),
                                               &start5, true);
    CHECK(ref.status == FitStatus::not_converged);
    SmallFit small;
    small.use(Xz, yz, offset);
    CHECK_FALSE(small.fit(w, options_for(Family::poisson), start5, out));
  }
  SECTION("no residual degrees of freedom") {
    const Eigen::MatrixXd X4 = X.topRows(4);
    const Eigen::VectorXd y4 = y.head(4) + Eigen::VectorXd::Ones(4);
    const Eigen::VectorXd o4 = offset.head(4);
    SmallFit small;
    small.use(X4, y4, o4);
    CHECK_FALSE(small.fit(Eigen::VectorXd::Ones(4), options_for(Family::quasipoisson), start, out));
  }
}

// The refit's entry point: the fast path where it applies, fit_glm's own
// result, bit for bit, where it does not (no warm start, negbin).
TEST_CASE("fit_fast_or_general takes the fast path only where it applies", "[glm]") {
  const int n = 300;
  const Eigen::MatrixXd X = daily_design(n, 6);
  Eigen::VectorXd y, offset;
  counts(X, 1.2, 0.3, true, y, offset);
  const Eigen::VectorXd w = Eigen::VectorXd::Ones(n);
  Eigen::VectorXd start = Eigen::VectorXd::Zero(6);
  start(0) = 1.0;
  for (const Family family : {Family::quasipoisson, Family::negbin}) {
    const FitOptions o = options_for(family);
    const Eigen::VectorXd* starts[2] = {nullptr, &start};
    for (const Eigen::VectorXd* s : starts) {
      SmallFit small;
      small.use(X, y, offset);
      const FitResult got = tallyd::glm::fit_fast_or_general(small, X, y, offset, w, o, s);
      const FitResult ref = tallyd::glm::fit_glm(X, y, offset, w, o, s, true);
      INFO("family " << to_string(family) << (s != nullptr ? " warm" : " cold"));
      const bool fast = family == Family::quasipoisson && s != nullptr;
      CHECK(small.estimate_at(got.coefficients) == fast);
      if (fast) {
        check_same(got, ref);
      } else {
        CHECK(got.coefficients == ref.coefficients);
        CHECK(got.covariance == ref.covariance);
        CHECK(got.iterations == ref.iterations);
        CHECK(got.note == ref.note);
      }
    }
  }
}
