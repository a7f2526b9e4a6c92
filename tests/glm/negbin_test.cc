// The negative binomial theta: the Newton search at fixed means, and the
// alternation with IRLS inside fit_glm. Checked against the NB2
// log-likelihood written out with std::lgamma and differentiated
// numerically, which shares no code with the digamma/trigamma path.
#include "glm/negbin.h"

#include <cmath>
#include <vector>

#include <catch2/catch.hpp>

#include "glm/fit.h"

namespace {

using tallyd::glm::Family;
using tallyd::glm::fit_glm;
using tallyd::glm::FitOptions;
using tallyd::glm::FitResult;
using tallyd::glm::FitStatus;

Eigen::VectorXd vec(std::vector<double> v) {
  return Eigen::Map<Eigen::VectorXd>(v.data(), static_cast<Eigen::Index>(v.size()));
}

// Overdispersed counts (made up): variance ~ 80 against a mean ~ 5.4.
const Eigen::VectorXd kSpread = vec({0, 1, 0, 12, 3, 0, 25, 2});
// Underdispersed counts (made up): variance below the mean.
const Eigen::VectorXd kTight = vec({3, 3, 3, 4, 2, 3});

// NB2 log-likelihood in theta at fixed means, from the probability mass
// function Gamma(theta + y) / (Gamma(theta) y!) (theta / (theta + mu))^theta
// (mu / (theta + mu))^y (common practice; MASS's dnbinom parametrisation).
double nb_loglik(const Eigen::VectorXd& y, const Eigen::VectorXd& mu, double theta) {
  double s = 0;
  for (Eigen::Index i = 0; i < y.size(); ++i) {
    s += std::lgamma(theta + y(i)) - std::lgamma(theta) - std::lgamma(y(i) + 1) +
         theta * std::log(theta / (theta + mu(i))) + y(i) * std::log(mu(i) / (theta + mu(i)));
  }
  return s;
}

FitOptions negbin() {
  FitOptions o;
  o.family = Family::negbin;
  return o;
}

}  // namespace

TEST_CASE("find_theta maximises the NB2 likelihood at fixed means", "[glm]") {
  const Eigen::VectorXd mu = Eigen::VectorXd::Constant(kSpread.size(), kSpread.mean());
  const Eigen::VectorXd w = Eigen::VectorXd::Ones(kSpread.size());
  const tallyd::glm::ThetaSearch s = tallyd::glm::find_theta(kSpread, mu, w, 0, 1e6, 1e-12, 100);
  REQUIRE(s.converged);
  REQUIRE_FALSE(s.at_limit);
  // Numerical first derivative of the log-likelihood is ~0 at the estimate.
  const double h = 1e-5 * s.theta;
  const double up = nb_loglik(kSpread, mu, s.theta + h);
  const double down = nb_loglik(kSpread, mu, s.theta - h);
  const double at = nb_loglik(kSpread, mu, s.theta);
  CHECK((up - down) / (2 * h) == Approx(0).margin(1e-6));
  CHECK(at > up);
  CHECK(at > down);
  // The observed information is minus the numerical second derivative.
  const double information = -(up - 2 * at + down) / (h * h);
  CHECK(tallyd::glm::theta_information(kSpread, mu, w, s.theta) ==
        Approx(information).epsilon(1e-4));
}

TEST_CASE("find_theta reports the Poisson limit on underdispersed counts", "[glm]") {
  const Eigen::VectorXd mu = Eigen::VectorXd::Constant(kTight.size(), kTight.mean());
  const Eigen::VectorXd w = Eigen::VectorXd::Ones(kTight.size());
  const tallyd::glm::ThetaSearch s = tallyd::glm::find_theta(kTight, mu, w, 0, 1e6, 1e-12, 100);
  CHECK(s.at_limit);
  CHECK(s.theta == 1e6);
  // The likelihood is still rising there.
  CHECK(nb_loglik(kTight, mu, 1e6) > nb_loglik(kTight, mu, 1e5));
}

TEST_CASE("negbin fit: mean, theta and its standard error", "[glm]") {
  const Eigen::Index n = kSpread.size();
  const Eigen::MatrixXd X = Eigen::MatrixXd::Ones(n, 1);
  const FitResult fit =
      fit_glm(X, kSpread, Eigen::VectorXd::Zero(n), Eigen::VectorXd::Ones(n), negbin());
  INFO("note: " << fit.note);
  REQUIRE(fit.status == FitStatus::ok);
  REQUIRE_FALSE(fit.theta_at_limit);
  // One NB2 mean: its score sum (y - mu) / (1 + mu / theta) vanishes at the
  // sample mean whatever theta (common practice).
  CHECK(std::exp(fit.coefficients(0)) == Approx(kSpread.mean()).epsilon(1e-10));
  const Eigen::VectorXd mu = Eigen::VectorXd::Constant(n, kSpread.mean());
  const double h = 1e-5 * fit.theta;
  const double up = nb_loglik(kSpread, mu, fit.theta + h);
  const double down = nb_loglik(kSpread, mu, fit.theta - h);
  const double at = nb_loglik(kSpread, mu, fit.theta);
  CHECK((up - down) / (2 * h) == Approx(0).margin(1e-6));
  const double information = -(up - 2 * at + down) / (h * h);
  CHECK(fit.theta_std_error == Approx(1 / std::sqrt(information)).epsilon(1e-4));
  CHECK(fit.log_likelihood == Approx(at).epsilon(1e-12));
  // MASS glm.nb's AIC: -2 loglik + 2 rank + 2 (theta).
  CHECK(fit.aic == Approx(-2 * at + 4).epsilon(1e-12));

  SECTION("a warm start with theta and coefficients takes fewer iterations") {
    FitOptions o = negbin();
    o.start_theta = fit.theta;
    const FitResult warm = fit_glm(X, kSpread, Eigen::VectorXd::Zero(n),
                                   Eigen::VectorXd::Ones(n), o, &fit.coefficients);
    REQUIRE(warm.status == FitStatus::ok);
    CHECK(warm.iterations < fit.iterations);
    CHECK(warm.theta == Approx(fit.theta).epsilon(1e-8));
    CHECK(warm.coefficients(0) == Approx(fit.coefficients(0)).epsilon(1e-10));
  }
  SECTION("an estimate beyond theta_max is reported as the Poisson limit") {
    FitOptions o = negbin();
    o.theta_max = 0.5 * fit.theta;
    const FitResult capped =
        fit_glm(X, kSpread, Eigen::VectorXd::Zero(n), Eigen::VectorXd::Ones(n), o);
    CHECK(capped.theta_at_limit);
    CHECK(std::isinf(capped.theta));
    CHECK(std::exp(capped.coefficients(0)) == Approx(kSpread.mean()).epsilon(1e-10));
  }
}

TEST_CASE("negbin on underdispersed counts is the Poisson fit, flagged", "[glm]") {
  const Eigen::Index n = kTight.size();
  const Eigen::MatrixXd X = Eigen::MatrixXd::Ones(n, 1);
  const Eigen::VectorXd zero = Eigen::VectorXd::Zero(n);
  const Eigen::VectorXd one = Eigen::VectorXd::Ones(n);
  const FitResult nb = fit_glm(X, kTight, zero, one, negbin());
  FitOptions p;
  p.family = Family::poisson;
  const FitResult poisson = fit_glm(X, kTight, zero, one, p);
  INFO("note: " << nb.note);
  REQUIRE(nb.status == FitStatus::ok);
  CHECK(nb.theta_at_limit);
  CHECK(std::isinf(nb.theta));
  CHECK(std::isnan(nb.theta_std_error));
  CHECK(nb.note.find("no overdispersion") != std::string::npos);
  CHECK(nb.coefficients(0) == Approx(poisson.coefficients(0)).epsilon(1e-12));
  CHECK(nb.deviance == Approx(poisson.deviance).epsilon(1e-12));
  CHECK(nb.covariance(0, 0) == Approx(poisson.covariance(0, 0)).epsilon(1e-12));
  CHECK(nb.aic == Approx(poisson.aic + 2).epsilon(1e-12));
}
