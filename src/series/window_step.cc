#include "series/window_step.h"

#include <algorithm>
#include <cmath>
#include <limits>

#include "glm/factor_inverse.h"

namespace tallyd {

void WindowStep::reset(const Eigen::VectorXd& beta_star, glm::Family family, double theta) {
  const Eigen::Index p = beta_star.size();
  active_ = true;
  family_ = family;
  theta_ = theta;
  beta_ = beta_star;
  information_.setZero(p, p);
  score_.setZero(p);
  pearson_ = 0;
  rows_ = 0;
}

void WindowStep::clear() {
  active_ = false;
  beta_.resize(0);
  information_.resize(0, 0);
  score_.resize(0);
  factor_.resize(0, 0);
  pearson_ = 0;
  rows_ = 0;
}

void WindowStep::account(const double* x, double offset, double y, double weight, double sign) {
  if (!(weight > 0)) return;
  const Eigen::Index p = beta_.size();
  double eta = offset;
  for (Eigen::Index j = 0; j < p; ++j) eta += x[j] * beta_(j);
  account_mean(x, std::exp(eta), y, weight, sign);
}

void WindowStep::account_mean(const double* x, double mu, double y, double weight, double sign) {
  if (!(weight > 0)) return;
  if (!(mu > 0) || !std::isfinite(mu)) return;
  const Eigen::Index p = beta_.size();
  // V(mu): mu, or mu + mu^2 / theta for NB2 (Poisson when theta is not a
  // positive finite number). Under the log link d mu / d eta = mu.
  const bool nb = family_ == glm::Family::negbin && std::isfinite(theta_) && theta_ > 0;
  const double variance = nb ? mu + mu * mu / theta_ : mu;
  const double working = sign * weight * mu * mu / variance;
  const double residual = y - mu;
  const double s = sign * weight * residual * mu / variance;
  for (Eigen::Index j = 0; j < p; ++j) {
    const double wx = working * x[j];
    for (Eigen::Index k = 0; k <= j; ++k) information_(j, k) += wx * x[k];
    score_(j) += s * x[j];
  }
  pearson_ += sign * weight * residual * residual / variance;
  if (sign > 0) ++rows_;
  else if (rows_ > 0) --rows_;
}

bool WindowStep::solve(Eigen::VectorXd& beta) {
  const Eigen::Index p = beta_.size();
  if (!active_ || rows_ < static_cast<std::size_t>(p)) return false;
  // Cholesky of A (lower triangle), by columns, as Eigen's unblocked LLT
  // would for these small sizes but without its allocations: this runs
  // after every record.
  if (factor_.rows() != p || factor_.cols() != p) factor_.resize(p, p);
  double largest = 0;
  double smallest = std::numeric_limits<double>::infinity();
  for (Eigen::Index j = 0; j < p; ++j) {
    double d = information_(j, j);
    for (Eigen::Index k = 0; k < j; ++k) d -= factor_(j, k) * factor_(j, k);
    if (!(d > 0)) return false;
    const double root = std::sqrt(d);
    factor_(j, j) = root;
    largest = std::max(largest, root);
    smallest = std::min(smallest, root);
    for (Eigen::Index i = j + 1; i < p; ++i) {
      double v = information_(i, j);
      for (Eigen::Index k = 0; k < j; ++k) v -= factor_(i, k) * factor_(j, k);
      factor_(i, j) = v / root;
    }
  }
  // Positive definite in floating point can still be near-singular (an
  // aliased column); refuse a factor whose diagonal collapsed.
  if (!(smallest > 1e-7 * largest)) return false;
  // beta* + A^-1 g: L z = g, then L' s = z.
  if (beta.size() != p) beta.resize(p);
  for (Eigen::Index i = 0; i < p; ++i) {
    double v = score_(i);
    for (Eigen::Index k = 0; k < i; ++k) v -= factor_(i, k) * beta(k);
    beta(i) = v / factor_(i, i);
  }
  for (Eigen::Index i = p - 1; i >= 0; --i) {
    double v = beta(i);
    for (Eigen::Index k = i + 1; k < p; ++k) v -= factor_(k, i) * beta(k);
    beta(i) = v / factor_(i, i);
  }
  beta += beta_;
  return true;
}

void WindowStep::inverse(double scale, Eigen::Ref<Eigen::MatrixXd> out) const {
  glm::scaled_inverse_from_factor([this](Eigen::Index i, Eigen::Index j) { return factor_(i, j); }, factor_.rows(),
                                  scale, out);
}

double WindowStep::distance2(const Eigen::VectorXd& beta) const {
  const Eigen::Index p = beta_.size();
  // d' A d from A's lower triangle: the diagonal once, the rest twice.
  double sum = 0;
  for (Eigen::Index j = 0; j < p; ++j) {
    const double dj = beta(j) - beta_(j);
    double off = 0;
    for (Eigen::Index k = 0; k < j; ++k) off += information_(j, k) * (beta(k) - beta_(k));
    sum += dj * (information_(j, j) * dj + 2 * off);
  }
  return sum;
}

}  // namespace tallyd
