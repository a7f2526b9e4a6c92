// The count distributions behind the families: Poisson and NB2 with a known
// size theta. Internal to glm/ (the IRLS loop, the theta search and the fit
// summary use it); callers outside glm/ go through fit.h.
//
// Conventions follow R's poisson() and MASS's negative.binomial(theta):
// deviance terms are 2 * (log f(y | mu = y) - log f(y | mu)), and a theta of
// +infinity stands for the Poisson limit. Pure functions, thread-safe.
#pragma once

#include <limits>

#include <Eigen/Dense>

namespace tallyd::glm {

struct Distribution {
  // NB2 size: Var(Y) = mu + mu^2 / theta. +infinity means Poisson.
  double theta = std::numeric_limits<double>::infinity();

  bool is_poisson() const;
  // Var(Y) at mean mu (before any dispersion).
  double variance(double mu) const;
  // Unit deviance d(y, mu) >= 0, without the prior weight. Infinite when
  // mu = 0 and y > 0.
  double unit_deviance(double y, double mu) const;
  // log P(Y = y | mu), y a non-negative integer (lgamma extends it to reals).
  double log_density(double y, double mu) const;
};

// Sums over records with prior weights w: sum w * unit_deviance.
double deviance(const Distribution& d, const Eigen::VectorXd& y, const Eigen::VectorXd& mu,
                const Eigen::VectorXd& w);
// sum w * log_density: the log-likelihood as R's family aic() counts it.
double log_likelihood(const Distribution& d, const Eigen::VectorXd& y, const Eigen::VectorXd& mu,
                      const Eigen::VectorXd& w);
// Pearson chi^2 = sum w (y - mu)^2 / Var(mu).
double pearson_chi2(const Distribution& d, const Eigen::VectorXd& y, const Eigen::VectorXd& mu,
                    const Eigen::VectorXd& w);

// NB2 log-likelihood in theta at fixed means: its first derivative (score)
// and minus its second derivative (observed information), as MASS's
// theta.ml defines them. theta must be positive and finite.
double theta_score(const Eigen::VectorXd& y, const Eigen::VectorXd& mu, const Eigen::VectorXd& w,
                   double theta);
double theta_information(const Eigen::VectorXd& y, const Eigen::VectorXd& mu,
                         const Eigen::VectorXd& w, double theta);

}  // namespace tallyd::glm
