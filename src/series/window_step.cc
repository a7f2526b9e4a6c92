#include "series/window_step.h"

#include <cmath>

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
  pearson_ = 0;
  rows_ = 0;
}

void WindowStep::account(const double* x, double offset, double y, double weight, double sign) {
  if (!(weight > 0)) return;
  const Eigen::Index p = beta_.size();
  double eta = offset;
  for (Eigen::Index j = 0; j < p; ++j) eta += x[j] * beta_(j);
  const double mu = std::exp(eta);
  if (!(mu > 0) || !std::isfinite(mu)) return;
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

bool WindowStep::solve(Eigen::VectorXd& beta, Eigen::MatrixXd& inverse_information) const {
  if (!active_ || rows_ < static_cast<std::size_t>(beta_.size())) return false;
  const Eigen::LLT<Eigen::MatrixXd, Eigen::Lower> llt(information_);
  if (llt.info() != Eigen::Success) return false;
  // Positive definite in floating point can still be near-singular (an
  // aliased column); refuse a factor whose diagonal collapsed.
  const Eigen::VectorXd diag = llt.matrixLLT().diagonal();
  if (!(diag.minCoeff() > 1e-7 * diag.maxCoeff())) return false;
  const Eigen::Index p = beta_.size();
  beta = beta_ + llt.solve(score_);
  inverse_information = llt.solve(Eigen::MatrixXd::Identity(p, p));
  return true;
}

double WindowStep::distance2(const Eigen::VectorXd& beta) const {
  const Eigen::VectorXd d = beta - beta_;
  const Eigen::VectorXd ad = information_.selfadjointView<Eigen::Lower>() * d;
  return d.dot(ad);
}

}  // namespace tallyd
