// Iteratively reweighted least squares at a fixed distribution (Poisson, or
// NB2 with a known theta). Internal to glm/: fit_glm and the negative
// binomial theta search drive it; fit.h is the public contract.
//
// Follows R's glm.fit (working response z = eta - offset + (y - mu) / mu_eta,
// working weights w mu_eta^2 / V(mu), start mu = y + 0.1, convergence on
// |dev - dev_old| / (|dev| + 0.1) < tolerance) with two additions:
//  - as in the glm2 algorithm (Marschner 2011, The R Journal 3(2)), a step
//    that raises the deviance is halved too, besides the invalid-mean and
//    non-finite-deviance halving that glm.fit does;
//  - when the very first step from y + 0.1 gives invalid means (sqrt and
//    identity links), where glm.fit gives up and asks for starting values,
//    the step is halved towards the constant-mean fit (the intercept column
//    at the mean count), when the design has an intercept.
#pragma once

#include <Eigen/Dense>

#include "glm/distribution.h"
#include "glm/family.h"
#include "glm/wls.h"

namespace tallyd::glm {

struct IrlsSettings {
  Link link = Link::log;
  Distribution distribution;  // Poisson when theta is +inf
  double tolerance = 1e-10;
  int max_iterations = 100;
  int max_halvings = 40;
  double alias_tolerance = 1e-9;
};

enum class IrlsStop {
  converged,        // deviance criterion met
  iteration_limit,  // max_iterations reached; the last valid iterate is kept
  no_valid_step,    // step-halving found no valid means (mu > 0, finite deviance); the last
                    // valid iterate is kept if there was one (has_coefficients)
  deviance_stuck,   // step-halving could not stop the deviance from rising; previous iterate kept
  rank_zero,        // no estimable column
};

struct IrlsOutcome {
  IrlsStop stop = IrlsStop::no_valid_step;
  bool has_coefficients = false;  // beta/eta/mu hold a valid iterate with eta = X beta + offset
  Eigen::VectorXd beta;           // length p, 0 for aliased columns
  Eigen::VectorXd eta;            // linear predictor, offset included
  Eigen::VectorXd mu;             // fitted means
  double deviance = 0;
  int rank = 0;
  int iterations = 0;
  // Log link only: records with a zero count whose linear predictor was still
  // falling by more than 0.5 per iteration when the deviance had settled, the
  // signature of a mean running to 0 (an MLE at infinity).
  int drifting_records = 0;  // how many; first_drifting is the first (-1 when none)
  Eigen::Index first_drifting = -1;
};

// sqrt of the IRLS working weights w * mu_eta(eta)^2 / V(mu), 0 where they
// are not finite (a mean so small that mu_eta underflows).
// Precondition: mu = link_inv(link, eta) as the IRLS loop computes it (under
// the log link mu_eta = exp(eta) is read from mu, not computed again).
void sqrt_working_weights(Link link, const Distribution& dist, const Eigen::VectorXd& eta,
                          const Eigen::VectorXd& mu, const Eigen::VectorXd& w,
                          Eigen::VectorXd& sqrt_w);

// Runs IRLS on records that all have positive prior weight `w`.
// Start, in order of preference: `start_beta` (length p) if it gives valid
// means; else `start_eta` (length n) if valid; else mu = y + 0.1.
// `wls` is the workspace; after the call it holds the factorisation of the
// last IRLS step, whose aliased columns are those of the result.
IrlsOutcome run_irls(const Eigen::MatrixXd& X, const Eigen::VectorXd& y,
                     const Eigen::VectorXd& offset, const Eigen::VectorXd& w,
                     const IrlsSettings& settings, const Eigen::VectorXd* start_beta,
                     const Eigen::VectorXd* start_eta, WeightedLeastSquares& wls);

}  // namespace tallyd::glm
