#include "glm/distribution.h"

#include <cmath>

#include <boost/math/special_functions/digamma.hpp>
#include <boost/math/special_functions/gamma.hpp>
#include <boost/math/special_functions/trigamma.hpp>

namespace tallyd::glm {
namespace {

namespace bmp = boost::math::policies;
// Boost.Math throws on poles and overflow by default; on the data path we
// want NaN/inf back instead (fit_glm never throws on data). No promotion to
// long double: double precision is ample here and much faster.
using Quiet = bmp::policy<bmp::domain_error<bmp::ignore_error>, bmp::pole_error<bmp::ignore_error>,
                          bmp::overflow_error<bmp::ignore_error>,
                          bmp::evaluation_error<bmp::ignore_error>, bmp::promote_double<false>>;

double lgamma_q(double x) { return boost::math::lgamma(x, Quiet()); }

// Below this count the digamma/trigamma differences are summed term by term:
// psi(theta + y) - psi(theta) = sum_{k<y} 1 / (theta + k). For a large theta
// the two digamma values agree to many digits and their difference would
// lose them; the sum does not.
constexpr double kDirectSumLimit = 100;

bool small_integer(double y) { return y < kDirectSumLimit && y == std::floor(y); }

// psi(theta + y) - psi(theta)
double digamma_step(double theta, double y) {
  if (small_integer(y)) {
    double s = 0;
    for (int k = 0; k < static_cast<int>(y); ++k) s += 1.0 / (theta + k);
    return s;
  }
  return boost::math::digamma(theta + y, Quiet()) - boost::math::digamma(theta, Quiet());
}

// psi'(theta) - psi'(theta + y)
double trigamma_step(double theta, double y) {
  if (small_integer(y)) {
    double s = 0;
    for (int k = 0; k < static_cast<int>(y); ++k) s += 1.0 / ((theta + k) * (theta + k));
    return s;
  }
  return boost::math::trigamma(theta, Quiet()) - boost::math::trigamma(theta + y, Quiet());
}

}  // namespace

bool Distribution::is_poisson() const { return std::isinf(theta); }

double Distribution::variance(double mu) const {
  return is_poisson() ? mu : mu + mu * mu / theta;
}

double Distribution::unit_deviance(double y, double mu) const {
  if (is_poisson()) {
    if (y <= 0) return 2 * mu;
    return 2 * (y * std::log(y / mu) - (y - mu));
  }
  // 2 [y log(y / mu) - (y + theta) log((y + theta) / (mu + theta))], written
  // with log1p so that it tends smoothly to the Poisson term as theta grows.
  if (y <= 0) return 2 * theta * std::log1p(mu / theta);
  return 2 * (y * std::log(y / mu) - (y + theta) * std::log1p((y - mu) / (mu + theta)));
}

double Distribution::log_density(double y, double mu) const {
  if (is_poisson()) {
    if (y <= 0) return -mu;
    return y * std::log(mu) - mu - lgamma_q(y + 1);
  }
  // lgamma(theta + y) - lgamma(theta) - lgamma(y + 1)
  //   + theta log(theta / (theta + mu)) + y log(mu / (theta + mu))
  const double head = -theta * std::log1p(mu / theta);
  if (y <= 0) return head;
  return lgamma_q(theta + y) - lgamma_q(theta) - lgamma_q(y + 1) + head +
         y * (std::log(mu) - std::log(theta + mu));
}

double deviance(const Distribution& d, const Eigen::VectorXd& y, const Eigen::VectorXd& mu,
                const Eigen::VectorXd& w) {
  double s = 0;
  for (Eigen::Index i = 0; i < y.size(); ++i) s += w(i) * d.unit_deviance(y(i), mu(i));
  return s;
}

double log_likelihood(const Distribution& d, const Eigen::VectorXd& y, const Eigen::VectorXd& mu,
                      const Eigen::VectorXd& w) {
  double s = 0;
  for (Eigen::Index i = 0; i < y.size(); ++i) s += w(i) * d.log_density(y(i), mu(i));
  return s;
}

double pearson_chi2(const Distribution& d, const Eigen::VectorXd& y, const Eigen::VectorXd& mu,
                    const Eigen::VectorXd& w) {
  double s = 0;
  for (Eigen::Index i = 0; i < y.size(); ++i) {
    const double r = y(i) - mu(i);
    s += w(i) * r * r / d.variance(mu(i));
  }
  return s;
}

double theta_score(const Eigen::VectorXd& y, const Eigen::VectorXd& mu, const Eigen::VectorXd& w,
                   double theta) {
  // MASS theta.ml: sum w [psi(theta + y) - psi(theta) + log(theta) + 1
  //                       - log(theta + mu) - (y + theta) / (mu + theta)],
  // regrouped so that no two large terms cancel when theta is large.
  double s = 0;
  for (Eigen::Index i = 0; i < y.size(); ++i) {
    const double m = mu(i);
    s += w(i) * (digamma_step(theta, y(i)) - std::log1p(m / theta) + (m - y(i)) / (m + theta));
  }
  return s;
}

double theta_information(const Eigen::VectorXd& y, const Eigen::VectorXd& mu,
                         const Eigen::VectorXd& w, double theta) {
  // MASS theta.ml: sum w [-psi'(theta + y) + psi'(theta) - 1/theta
  //                       + 2 / (mu + theta) - (y + theta) / (mu + theta)^2],
  // with -1/theta + 1/(mu + theta) = -mu / (theta (mu + theta)).
  double s = 0;
  for (Eigen::Index i = 0; i < y.size(); ++i) {
    const double m = mu(i);
    const double mt = m + theta;
    s += w(i) * (trigamma_step(theta, y(i)) - m / (theta * mt) + (m - y(i)) / (mt * mt));
  }
  return s;
}

}  // namespace tallyd::glm
