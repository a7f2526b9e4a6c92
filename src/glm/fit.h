// Fitting a Poisson-family GLM by IRLS: the numeric heart of every series model.
//
// Contract: fit_glm never throws on data. Whatever the data, it returns a
// FitResult whose `status` says whether the coefficients can be used; on
// failure `note` says why in one sentence. Pure function, thread-safe.
#pragma once

#include <string>
#include <vector>

#include <Eigen/Dense>

#include "glm/family.h"

namespace tallyd::glm {

struct FitOptions {
  Family family = Family::poisson;  // count distribution
  Link link = Link::log;            // link function
  double tolerance = 1e-10;         // stop when |dev - dev_old| / (|dev| + 0.1) < tolerance
  int max_iterations = 100;         // IRLS iterations (per theta step for negbin)
  int max_halvings = 40;            // step-halvings per iteration when the deviance rises or mu <= 0
  double alias_tolerance = 1e-9;    // pivoted-QR relative diagonal below which a column is aliased
  bool null_deviance = true;        // also fit the intercept-only (plus offset) model
  double theta_max = 1e6;           // negbin: theta beyond this is reported as the Poisson limit
  double start_theta = 0;           // negbin: initial theta (a warm start); 0 = moment estimate from a Poisson fit
};

enum class FitStatus {
  ok,             // converged
  not_converged,  // hit max_iterations; coefficients are the last iterate and still usable
  failed,         // no usable coefficients (no data, all weights zero, non-finite deviance...)
};

std::string_view to_string(FitStatus s);

struct FitResult {
  FitStatus status = FitStatus::failed;
  std::string note;  // why it failed, or informational ("column 3 aliased and dropped")

  // Length p (columns of X). Aliased columns have coefficient 0 and zero
  // rows/columns in `covariance`, and are listed in `aliased`.
  Eigen::VectorXd coefficients;
  std::vector<bool> aliased;
  // Covariance of the estimates: inverse Fisher information, multiplied by
  // `dispersion` for quasi-Poisson (as R's summary.glm does).
  Eigen::MatrixXd covariance;

  double deviance = 0;       // residual deviance (for negbin at the fitted theta)
  double null_deviance = 0;  // deviance of intercept(+offset)-only model, same family/theta; NaN if not asked
  double log_likelihood = 0; // NaN for quasi-Poisson
  double aic = 0;            // -2 loglik + 2 (rank [+1 for theta]); NaN for quasi-Poisson (undefined)
  double dispersion = 1;     // Pearson chi^2 / df_residual for quasi-Poisson, else 1
  double theta = 0;          // negbin size parameter; +inf for poisson/quasipoisson and at the Poisson limit
  bool theta_at_limit = false;  // negbin: ML theta ran off to infinity; the fit is the Poisson fit
  double theta_std_error = 0;   // negbin: from the observed information; NaN otherwise
  int rank = 0;              // number of non-aliased columns
  int df_residual = 0;       // n_used - rank (records with positive weight)
  int n = 0;                 // records with positive prior weight
  int iterations = 0;        // IRLS iterations (summed over theta steps for negbin)
};

// Fits y ~ X with `offset` (added to the linear predictor, e.g. log exposure)
// and non-negative prior `weights` (0 leaves a record out).
// Preconditions: X.rows() == y.size() == offset.size() == weights.size();
// y holds non-negative integers. `start`, when non-null and of length p, is
// used as the initial coefficients (a warm start); otherwise mu starts at
// y + 0.1 as usual.
// Column 0 is treated as the intercept for the null deviance when
// `has_intercept` is true.
FitResult fit_glm(const Eigen::MatrixXd& X, const Eigen::VectorXd& y, const Eigen::VectorXd& offset,
                  const Eigen::VectorXd& weights, const FitOptions& options,
                  const Eigen::VectorXd* start = nullptr, bool has_intercept = true);

}  // namespace tallyd::glm
