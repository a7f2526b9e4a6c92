// Negative binomial (NB2) fits: theta by maximum likelihood alternating with
// IRLS at fixed theta, as MASS's glm.nb / theta.ml do (Venables and Ripley
// 2002, section 7.4). Internal to glm/; fit.h is the public contract.
#pragma once

#include <Eigen/Dense>

#include "glm/irls.h"

namespace tallyd::glm {

// The ML theta for fixed means, by Newton's method on the score
// (MASS theta.ml), safeguarded to stay in (0, theta_max].
struct ThetaSearch {
  double theta = 0;       // the estimate (theta_max when at_limit)
  bool at_limit = false;  // the likelihood still rises at theta_max: no overdispersion
  bool converged = false; // relative Newton step below tolerance (or at_limit)
  int iterations = 0;
};

// `theta_start` <= 0 or non-finite asks for the moment estimate
// sum(w) / sum(w (y / mu - 1)^2) that theta.ml starts from.
ThetaSearch find_theta(const Eigen::VectorXd& y, const Eigen::VectorXd& mu,
                       const Eigen::VectorXd& w, double theta_start, double theta_max,
                       double tolerance, int max_iterations);

struct NegbinOutcome {
  IrlsOutcome fit;        // the last IRLS fit (Poisson when at_limit)
  double theta = 0;       // the theta `fit` was made at; +inf when at_limit
  bool at_limit = false;  // theta ran off to infinity: `fit` is the Poisson fit
  bool converged = false; // both the IRLS fits and the theta/likelihood alternation converged
  int iterations = 0;     // IRLS iterations summed over all fits
};

// Alternates IRLS at fixed theta with find_theta until the log-likelihood
// and theta both settle (relative change below settings.tolerance).
// Starts from an NB fit at `start_theta` when it is positive and finite
// (a warm start), otherwise from the Poisson fit as glm.nb does.
NegbinOutcome fit_negbin(const Eigen::MatrixXd& X, const Eigen::VectorXd& y,
                         const Eigen::VectorXd& offset, const Eigen::VectorXd& w,
                         IrlsSettings settings, const Eigen::VectorXd* start_beta,
                         double start_theta, double theta_max, WeightedLeastSquares& wls);

}  // namespace tallyd::glm
