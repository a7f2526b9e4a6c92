// fit_glm on awkward data: aliased columns, invalid values, zero counts,
// means at the edge of the valid region. None of it may throw, and none of
// it may come back as NaN coefficients with status ok.
#include "glm/fit.h"

#include <cmath>
#include <string>
#include <vector>

#include <catch2/catch.hpp>

namespace {

using tallyd::glm::Family;
using tallyd::glm::fit_glm;
using tallyd::glm::FitOptions;
using tallyd::glm::FitResult;
using tallyd::glm::FitStatus;
using tallyd::glm::Link;

Eigen::VectorXd vec(std::vector<double> v) {
  return Eigen::Map<Eigen::VectorXd>(v.data(), static_cast<Eigen::Index>(v.size()));
}
Eigen::VectorXd zeros(Eigen::Index n) { return Eigen::VectorXd::Zero(n); }
Eigen::VectorXd ones(Eigen::Index n) { return Eigen::VectorXd::Ones(n); }

FitOptions with(Family family, Link link = Link::log) {
  FitOptions o;
  o.family = family;
  o.link = link;
  return o;
}

bool mentions(const FitResult& fit, const std::string& text) {
  return fit.note.find(text) != std::string::npos;
}

// Intercept and a linear trend over n records, with made-up counts.
struct Trend {
  Eigen::MatrixXd X;
  Eigen::VectorXd y;
};
Trend trend(const std::vector<double>& counts) {
  Trend t;
  t.y = vec(counts);
  const Eigen::Index n = t.y.size();
  t.X.resize(n, 2);
  for (Eigen::Index i = 0; i < n; ++i) t.X.row(i) << 1.0, static_cast<double>(i);
  return t;
}

const std::vector<double> kCounts = {3, 5, 2, 6, 4, 8, 7, 9, 6, 11};

}  // namespace

TEST_CASE("an exactly collinear column is dropped with a note, not NaN", "[glm]") {
  const Trend t = trend(kCounts);
  const Eigen::Index n = t.y.size();
  Eigen::MatrixXd X(n, 4);
  // Columns: intercept, trend, 2 * trend + 1 (aliased), a repeat of the intercept (aliased).
  X << t.X, (2 * t.X.col(1)).array() + 1, t.X.col(0);
  for (Family family : {Family::poisson, Family::quasipoisson, Family::negbin}) {
    INFO("family " << tallyd::glm::to_string(family));
    const FitResult full = fit_glm(X, t.y, zeros(n), ones(n), with(family));
    const FitResult reduced = fit_glm(t.X, t.y, zeros(n), ones(n), with(family));
    INFO("note: " << full.note);
    REQUIRE(full.status == FitStatus::ok);
    CHECK(full.aliased == std::vector<bool>{false, false, true, true});
    CHECK(mentions(full, "column(s) 2, 3 aliased"));
    CHECK(full.rank == 2);
    CHECK(full.coefficients.allFinite());
    CHECK(full.covariance.allFinite());
    CHECK(full.coefficients(2) == 0);
    CHECK(full.covariance.row(3).isZero());
    // The earlier columns are kept, as R's glm keeps them (common practice).
    for (Eigen::Index j = 0; j < 2; ++j) {
      CHECK(full.coefficients(j) == Approx(reduced.coefficients(j)).epsilon(1e-9));
      CHECK(full.covariance(j, j) == Approx(reduced.covariance(j, j)).epsilon(1e-8));
    }
    CHECK(full.df_residual == reduced.df_residual);
  }
}

// A yearly harmonic sampled at whole periods is 0 up to rounding on every
// record (sin(2 pi k) ~ 1e-16): nothing can be learned about it yet.
TEST_CASE("a harmonic column that is ~0 on all records is aliased", "[glm]") {
  const Trend t = trend(kCounts);
  const Eigen::Index n = t.y.size();
  Eigen::MatrixXd X(n, 3);
  for (Eigen::Index i = 0; i < n; ++i) {
    X.row(i) << 1.0, static_cast<double>(i), std::sin(2 * M_PI * static_cast<double>(i));
  }
  REQUIRE_FALSE(X.col(2).isZero(0.0));  // really rounding noise, not exact zeros
  const FitResult fit = fit_glm(X, t.y, zeros(n), ones(n), with(Family::poisson));
  INFO("note: " << fit.note);
  REQUIRE(fit.status == FitStatus::ok);
  CHECK(fit.aliased[2]);
  CHECK(fit.coefficients(2) == 0);
  CHECK(mentions(fit, "column(s) 2 aliased"));
  CHECK(fit.covariance.allFinite());
}

TEST_CASE("records with invalid values are left out and counted", "[glm]") {
  const Trend t = trend(kCounts);
  const Eigen::Index n = t.y.size();
  const FitResult clean = fit_glm(t.X, t.y, zeros(n), ones(n), with(Family::poisson));

  Eigen::MatrixXd X(n + 5, 2);
  Eigen::VectorXd y(n + 5);
  Eigen::VectorXd offset = zeros(n + 5);
  Eigen::VectorXd w = ones(n + 5);
  X << t.X, Eigen::MatrixXd::Ones(5, 2);
  y << t.y, 1, 2, 3, -4, 1;
  y(n) = std::nan("");     // missing count
  X(n + 1, 1) = INFINITY;  // broken covariate
  w(n + 2) = -1;           // negative weight; y(n + 3) = -4 is a negative count
  offset(n + 4) = std::nan("");
  w(n + 4) = 0;  // left out by the caller, so its NaN offset is not an error
  const FitResult fit = fit_glm(X, y, offset, w, with(Family::poisson));
  INFO("note: " << fit.note);
  REQUIRE(fit.status == FitStatus::ok);
  CHECK(fit.n == n);
  CHECK(mentions(fit, "4 record(s) with a non-finite or negative value left out "
                      "(first: record 10)"));
  CHECK(fit.coefficients(0) == Approx(clean.coefficients(0)).epsilon(1e-12));
  CHECK(fit.coefficients(1) == Approx(clean.coefficients(1)).epsilon(1e-12));
}

TEST_CASE("all-zero counts fail cleanly under every family and link", "[glm]") {
  // The Poisson MLE of a mean with only zero counts is 0: log-link
  // intercept -infinity (common practice); there is nothing finite to report.
  const Trend t = trend({0, 0, 0, 0, 0, 0});
  const Eigen::Index n = t.y.size();
  for (Family family : {Family::poisson, Family::quasipoisson, Family::negbin}) {
    for (Link link : {Link::log, Link::sqrt, Link::identity}) {
      const FitResult fit = fit_glm(t.X, t.y, zeros(n), ones(n), with(family, link));
      CHECK(fit.status == FitStatus::failed);
      CHECK(mentions(fit, "all 6 counts are zero"));
      CHECK(fit.coefficients.size() == 2);
      CHECK(fit.coefficients.allFinite());
    }
  }
}

TEST_CASE("a group with only zero counts is reported as an MLE at infinity", "[glm]") {
  // Group B has only zeros: its log mean runs to -infinity while group A's
  // stays at log(mean of A) (common practice: quasi-complete separation).
  Eigen::MatrixXd X(7, 2);
  X << 1, 0, 1, 0, 1, 0, 1, 0, 1, 1, 1, 1, 1, 1;
  const Eigen::VectorXd y = vec({3, 5, 4, 6, 0, 0, 0});
  for (Family family : {Family::poisson, Family::negbin}) {
    const FitResult fit = fit_glm(X, y, zeros(7), ones(7), with(family));
    INFO("note: " << fit.note);
    CHECK(fit.status == FitStatus::not_converged);
    CHECK(mentions(fit, "zero-count record(s) (first: record 4) runs to 0"));
    CHECK(fit.coefficients.allFinite());
    CHECK(fit.coefficients(0) == Approx(std::log(4.5)).epsilon(1e-8));
    CHECK(std::exp(fit.coefficients(0) + fit.coefficients(1)) < 1e-6);
  }
}

// Identity-link trend through counts that start at 0. The constrained MLE
// sits on the edge mu(0) = 0: the score for the intercept is negative there,
// and with the intercept at 0 the rate is sum y / sum t = 44 / 45 (closed
// form of a rate through the origin, common practice). R 4.2's glm stops at
// the first step here ("no valid set of coefficients has been found").
TEST_CASE("identity link: step-halving keeps every mean positive", "[glm]") {
  const Trend t = trend({0, 1, 0, 2, 3, 5, 4, 8, 9, 12});
  const Eigen::Index n = t.y.size();
  const FitResult fit = fit_glm(t.X, t.y, zeros(n), ones(n), with(Family::poisson, Link::identity));
  INFO("note: " << fit.note);
  REQUIRE(fit.status == FitStatus::ok);
  const Eigen::VectorXd mu = t.X * fit.coefficients;
  CHECK(mu.minCoeff() > 0);
  CHECK(fit.coefficients(0) < 1e-6);
  // Halving along the edge converges slowly; 1e-4 is what the deviance
  // criterion guarantees here.
  CHECK(fit.coefficients(1) == Approx(44.0 / 45.0).epsilon(1e-4));
  CHECK(mentions(fit, "boundary 0 of the identity link"));
  CHECK(std::isfinite(fit.deviance));
}

TEST_CASE("degenerate shapes fail with a note instead of throwing", "[glm]") {
  SECTION("no rows") {
    const FitResult fit =
        fit_glm(Eigen::MatrixXd(0, 2), zeros(0), zeros(0), zeros(0), with(Family::poisson));
    CHECK(fit.status == FitStatus::failed);
    CHECK(mentions(fit, "no record with positive weight"));
    CHECK(fit.coefficients.size() == 2);
  }
  SECTION("all weights zero") {
    const Trend t = trend(kCounts);
    const FitResult fit = fit_glm(t.X, t.y, zeros(10), zeros(10), with(Family::poisson));
    CHECK(fit.status == FitStatus::failed);
    CHECK(fit.n == 0);
  }
  SECTION("mismatched lengths") {
    const Trend t = trend(kCounts);
    const FitResult fit = fit_glm(t.X, t.y, zeros(9), ones(10), with(Family::poisson));
    CHECK(fit.status == FitStatus::failed);
    CHECK(mentions(fit, "shape mismatch"));
  }
  SECTION("rank 0: every column is zero") {
    const FitResult fit = fit_glm(Eigen::MatrixXd::Zero(4, 3), vec({1, 2, 0, 3}), zeros(4),
                                  ones(4), with(Family::poisson));
    CHECK(fit.status == FitStatus::failed);
    CHECK(mentions(fit, "no estimable column"));
    CHECK(fit.coefficients.allFinite());
  }
  SECTION("unusable options") {
    const Trend t = trend(kCounts);
    FitOptions o = with(Family::negbin);
    o.theta_max = 0;
    const FitResult fit = fit_glm(t.X, t.y, zeros(10), ones(10), o);
    CHECK(fit.status == FitStatus::failed);
    CHECK(mentions(fit, "invalid options: theta_max"));
  }
  SECTION("more columns than records: saturated, and no dispersion for quasi-Poisson") {
    Eigen::MatrixXd X(2, 4);
    X << 1, 2, 3, 4, 1, 0, 1, 5;
    const Eigen::VectorXd y = vec({3, 4});
    const FitResult poisson = fit_glm(X, y, zeros(2), ones(2), with(Family::poisson));
    CHECK(poisson.status == FitStatus::ok);
    CHECK(poisson.rank == 2);
    CHECK(poisson.df_residual == 0);
    CHECK(poisson.deviance == Approx(0).margin(1e-10));
    const FitResult quasi = fit_glm(X, y, zeros(2), ones(2), with(Family::quasipoisson));
    CHECK(quasi.status == FitStatus::failed);
    CHECK(mentions(quasi, "no residual degrees of freedom"));
  }
}

TEST_CASE("an iteration limit gives not_converged with usable coefficients", "[glm]") {
  const Trend t = trend(kCounts);
  FitOptions o = with(Family::poisson);
  o.max_iterations = 1;
  const FitResult fit = fit_glm(t.X, t.y, zeros(10), ones(10), o);
  CHECK(fit.status == FitStatus::not_converged);
  CHECK(mentions(fit, "did not converge in 1 iterations"));
  CHECK(fit.coefficients.allFinite());
}
