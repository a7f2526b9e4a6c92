// fit_glm on small data with closed-form answers (no R needed).
#include "glm/fit.h"

#include <cmath>
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

// log P(Y = y) for Poisson(mu), from the textbook formula.
double log_dpois(double y, double mu) { return y * std::log(mu) - mu - std::lgamma(y + 1); }

// Three groups of counts for a one-way layout (made up for this test).
const std::vector<double> kGroupCounts[3] = {{4, 7, 5, 6}, {12, 9, 15}, {2, 0, 3, 1, 4}};

struct Layout {
  Eigen::MatrixXd X;  // intercept, group 2, group 3 (treatment contrasts)
  Eigen::VectorXd y;
  double mean[3] = {0, 0, 0};
  double total[3] = {0, 0, 0};
};

Layout one_way_layout() {
  Layout l;
  std::vector<double> y;
  std::vector<int> group;
  for (int g = 0; g < 3; ++g) {
    for (double c : kGroupCounts[g]) {
      y.push_back(c);
      group.push_back(g);
      l.total[g] += c;
    }
    l.mean[g] = l.total[g] / static_cast<double>(kGroupCounts[g].size());
  }
  const auto n = static_cast<Eigen::Index>(y.size());
  l.y = vec(y);
  l.X = Eigen::MatrixXd::Zero(n, 3);
  for (Eigen::Index i = 0; i < n; ++i) {
    l.X(i, 0) = 1;
    if (group[static_cast<std::size_t>(i)] > 0) l.X(i, group[static_cast<std::size_t>(i)]) = 1;
  }
  return l;
}

}  // namespace

// Closed forms for a single Poisson mean (common practice): the MLE is the
// sample mean, so beta = log(mean y); the Fisher information for log(mu) is
// n * mean = sum y, so SE = 1 / sqrt(sum y); deviance 2 sum y log(y / mean).
TEST_CASE("Poisson intercept only: log of the mean, SE 1/sqrt(sum y)", "[glm]") {
  const Eigen::VectorXd y = vec({2, 0, 5, 3, 7, 1, 4});
  const Eigen::MatrixXd X = Eigen::MatrixXd::Ones(7, 1);
  const FitResult fit = fit_glm(X, y, zeros(7), ones(7), with(Family::poisson));
  REQUIRE(fit.status == FitStatus::ok);
  const double mean = y.mean();
  CHECK(fit.coefficients(0) == Approx(std::log(mean)).epsilon(1e-12));
  CHECK(std::sqrt(fit.covariance(0, 0)) == Approx(1 / std::sqrt(y.sum())).epsilon(1e-8));
  double dev = 0;
  double loglik = 0;
  for (double v : y) {
    if (v > 0) dev += 2 * v * std::log(v / mean);
    loglik += log_dpois(v, mean);
  }
  CHECK(fit.deviance == Approx(dev).epsilon(1e-10));
  CHECK(fit.null_deviance == Approx(dev).epsilon(1e-10));
  CHECK(fit.log_likelihood == Approx(loglik).epsilon(1e-12));
  CHECK(fit.aic == Approx(-2 * loglik + 2).epsilon(1e-12));  // R's Poisson AIC (common practice)
  CHECK(fit.rank == 1);
  CHECK(fit.df_residual == 6);
  CHECK(std::isinf(fit.theta));
  CHECK(fit.note.empty());
}

// A rate with exposure (common practice): with offset log(exposure) the MLE
// of the rate is sum y / sum exposure, SE of its log still 1 / sqrt(sum y).
TEST_CASE("offset log(exposure): the rate is sum y / sum exposure", "[glm]") {
  const Eigen::VectorXd y = vec({3, 9, 4, 0, 6});
  const Eigen::VectorXd exposure = vec({1.5, 4, 2, 0.5, 3.25});
  const Eigen::VectorXd offset = exposure.array().log().matrix();
  const FitResult fit =
      fit_glm(Eigen::MatrixXd::Ones(5, 1), y, offset, ones(5), with(Family::poisson));
  REQUIRE(fit.status == FitStatus::ok);
  CHECK(std::exp(fit.coefficients(0)) == Approx(y.sum() / exposure.sum()).epsilon(1e-12));
  CHECK(std::sqrt(fit.covariance(0, 0)) == Approx(1 / std::sqrt(y.sum())).epsilon(1e-8));
}

// One-way layout (common practice): the fitted mean of each group is the
// group mean under any link, since the model is saturated in the groups.
// Under the log link SE(log mean of a group) = 1 / sqrt(group total).
TEST_CASE("one-way layout: fitted means are the group means under every link", "[glm]") {
  const Layout l = one_way_layout();
  const Eigen::Index n = l.y.size();
  for (Link link : {Link::log, Link::sqrt, Link::identity}) {
    INFO("link " << tallyd::glm::to_string(link));
    const FitResult fit = fit_glm(l.X, l.y, zeros(n), ones(n), with(Family::poisson, link));
    INFO("note: " << fit.note);
    REQUIRE(fit.status == FitStatus::ok);
    const Eigen::VectorXd b = fit.coefficients;
    for (int g = 0; g < 3; ++g) {
      const double eta = b(0) + (g > 0 ? b(g) : 0.0);
      CHECK(tallyd::glm::link_inv(link, eta) == Approx(l.mean[g]).epsilon(1e-8));
    }
  }
  const FitResult fit = fit_glm(l.X, l.y, zeros(n), ones(n), with(Family::poisson));
  CHECK(std::sqrt(fit.covariance(0, 0)) == Approx(1 / std::sqrt(l.total[0])).epsilon(1e-8));
  CHECK(std::sqrt(fit.covariance(1, 1)) ==
        Approx(std::sqrt(1 / l.total[0] + 1 / l.total[1])).epsilon(1e-8));
}

// Quasi-Poisson (common practice): phi = Pearson chi^2 / (n - p); for one
// mean that is sum (y - mean)^2 / mean / (n - 1), and the SE grows by sqrt(phi).
TEST_CASE("quasi-Poisson: Pearson dispersion scales the covariance", "[glm]") {
  const Eigen::VectorXd y = vec({0, 12, 3, 1, 9, 0, 15, 2});
  const FitResult fit =
      fit_glm(Eigen::MatrixXd::Ones(8, 1), y, zeros(8), ones(8), with(Family::quasipoisson));
  REQUIRE(fit.status == FitStatus::ok);
  const double mean = y.mean();
  const double phi = (y.array() - mean).square().sum() / mean / 7;
  CHECK(fit.dispersion == Approx(phi).epsilon(1e-10));
  CHECK(std::sqrt(fit.covariance(0, 0)) == Approx(std::sqrt(phi / y.sum())).epsilon(1e-8));
  CHECK(std::isnan(fit.aic));
  CHECK(std::isnan(fit.log_likelihood));
}

// Prior weights (common practice): weight 0 is the same as leaving the
// record out; an integer weight k is the same as k copies of the record.
TEST_CASE("prior weights: 0 leaves a record out, 2 counts it twice", "[glm]") {
  const Layout l = one_way_layout();
  const Eigen::Index n = l.y.size();
  const FitResult base = fit_glm(l.X, l.y, zeros(n), ones(n), with(Family::poisson));

  SECTION("a zero-weight outlier changes nothing") {
    Eigen::MatrixXd X(n + 1, 3);
    X << l.X, Eigen::RowVector3d(1, 1, 0);
    Eigen::VectorXd y(n + 1);
    y << l.y, 5000;
    Eigen::VectorXd w = ones(n + 1);
    w(n) = 0;
    const FitResult fit = fit_glm(X, y, zeros(n + 1), w, with(Family::poisson));
    REQUIRE(fit.status == FitStatus::ok);
    CHECK(fit.n == base.n);
    CHECK(fit.df_residual == base.df_residual);
    for (Eigen::Index j = 0; j < 3; ++j) {
      CHECK(fit.coefficients(j) == Approx(base.coefficients(j)).epsilon(1e-12));
    }
    CHECK(fit.deviance == Approx(base.deviance).epsilon(1e-12));
  }
  SECTION("weight 2 equals a duplicated record") {
    Eigen::MatrixXd X(n + 1, 3);
    X << l.X, l.X.row(0);
    Eigen::VectorXd y(n + 1);
    y << l.y, l.y(0);
    const FitResult copies = fit_glm(X, y, zeros(n + 1), ones(n + 1), with(Family::poisson));
    Eigen::VectorXd w = ones(n);
    w(0) = 2;
    const FitResult weighted = fit_glm(l.X, l.y, zeros(n), w, with(Family::poisson));
    for (Eigen::Index j = 0; j < 3; ++j) {
      CHECK(weighted.coefficients(j) == Approx(copies.coefficients(j)).epsilon(1e-12));
      CHECK(weighted.covariance(j, j) == Approx(copies.covariance(j, j)).epsilon(1e-10));
    }
    CHECK(weighted.deviance == Approx(copies.deviance).epsilon(1e-12));
  }
}

TEST_CASE("warm start converges in fewer iterations to the same fit", "[glm]") {
  const Layout l = one_way_layout();
  const Eigen::Index n = l.y.size();
  for (Link link : {Link::log, Link::sqrt, Link::identity}) {
    INFO("link " << tallyd::glm::to_string(link));
    const FitOptions o = with(Family::poisson, link);
    const FitResult cold = fit_glm(l.X, l.y, zeros(n), ones(n), o);
    const FitResult warm = fit_glm(l.X, l.y, zeros(n), ones(n), o, &cold.coefficients);
    REQUIRE(warm.status == FitStatus::ok);
    CHECK(warm.iterations < cold.iterations);
    CHECK(warm.iterations <= 2);
    for (Eigen::Index j = 0; j < 3; ++j) {
      CHECK(warm.coefficients(j) == Approx(cold.coefficients(j)).epsilon(1e-6).margin(1e-9));
    }
  }
  SECTION("a start of the wrong length is ignored with a note") {
    const Eigen::VectorXd bad = ones(5);
    const FitResult fit = fit_glm(l.X, l.y, zeros(n), ones(n), with(Family::poisson), &bad);
    CHECK(fit.status == FitStatus::ok);
    CHECK(fit.note.find("start coefficients ignored") != std::string::npos);
  }
}

// The null deviance without an intercept is the deviance at eta = offset,
// as R's glm.fit defines it (common practice for R users).
TEST_CASE("null deviance without an intercept is the deviance at eta = offset", "[glm]") {
  const Eigen::VectorXd y = vec({3, 7, 2, 9});
  const Eigen::VectorXd offset = vec({1.0, 1.5, 0.5, 2.0});
  const Eigen::MatrixXd X = vec({0.2, 0.4, -0.1, 0.3});
  const FitResult fit = fit_glm(X, y, offset, ones(4), with(Family::poisson), nullptr, false);
  REQUIRE(fit.status == FitStatus::ok);
  double dev = 0;
  for (Eigen::Index i = 0; i < 4; ++i) {
    const double mu = std::exp(offset(i));
    dev += 2 * (y(i) * std::log(y(i) / mu) - (y(i) - mu));
  }
  CHECK(fit.null_deviance == Approx(dev).epsilon(1e-12));

  FitOptions o = with(Family::poisson);
  o.null_deviance = false;
  CHECK(std::isnan(fit_glm(X, y, offset, ones(4), o).null_deviance));
}
