// Fitting a Poisson-family GLM by IRLS: the numeric heart of every series model.
//
// Contract: fit_glm never throws on data. Whatever the data, it returns a
// FitResult whose `status` says whether the coefficients can be used; `note`
// says why it failed, or carries information worth showing (columns dropped,
// records left out, the Poisson limit of a negbin fit), as "; "-separated
// sentences. Column and record indices in notes are 0-based indices into the
// caller's X. Pure function, thread-safe.
//
// Conventions follow R's glm (poisson, quasipoisson) and MASS's glm.nb
// (negbin), so that results can be checked against them.
#pragma once

#include <string>
#include <vector>

#include <Eigen/Dense>

#include "glm/family.h"

namespace tallyd::glm {

struct FitOptions {
  Family family = Family::poisson;  // count distribution
  Link link = Link::log;            // link function
  double tolerance = 1e-10;         // stop when |dev - dev_old| / (|dev| + 0.1) < tolerance; for
                                    // negbin also the relative change in theta and the change
                                    // in log-likelihood / sqrt(2 df) between theta steps
  int max_iterations = 100;         // IRLS iterations (per theta step for negbin); also the
                                    // number of theta steps for negbin
  int max_halvings = 40;            // step-halvings per iteration when the deviance rises or
                                    // a mean leaves the valid region (mu <= 0)
  double alias_tolerance = 1e-9;    // a column is aliased when its part not explained by the
                                    // columns before it is below this fraction of its own norm,
                                    // or its whole norm below this fraction of the largest
                                    // column's (weighted design, as R's QR with tol)
  bool null_deviance = true;        // also fit the intercept-only (plus offset) model
  double theta_max = 1e6;           // negbin: theta beyond this is reported as the Poisson limit
  double start_theta = 0;           // negbin: initial theta (a warm start); 0, +inf or >= theta_max
                                    // = start from the Poisson fit and the moment estimate
};

enum class FitStatus {
  ok,             // converged
  not_converged,  // hit max_iterations, step-halving stalled, or a mean runs off to 0 (an MLE at
                  // infinity, see note); coefficients are the last iterate and still usable
  failed,         // no usable coefficients (no data, all counts zero, rank 0, no valid start...)
};

std::string_view to_string(FitStatus s);

// Everything of a fit but its arrays (a series model keeps its arrays in a
// block of its own: series/model_fit.h).
struct FitFigures {
  FitStatus status = FitStatus::failed;
  std::string note;  // why it failed, or informational ("column(s) 3 aliased and dropped ...")

  double deviance = 0;       // residual deviance (for negbin at the fitted theta); NaN when failed
  double null_deviance = 0;  // with has_intercept: deviance of the column-0(+offset)-only fit, same
                             // family and theta; without: deviance at eta = offset (as R);
                             // NaN if not asked or failed
  double log_likelihood = 0; // sum of w log f(y); NaN for quasi-Poisson and when failed
  double aic = 0;            // -2 loglik + 2 rank (poisson); + 2 more for theta (negbin, also at
                             // the Poisson limit, as MASS glm.nb); NaN for quasi-Poisson
  double dispersion = 1;     // Pearson chi^2 / df_residual for quasi-Poisson, else 1; a
                             // quasi-Poisson fit with df_residual 0 fails (dispersion NaN)
  double theta = 0;          // negbin size parameter; +inf for poisson/quasipoisson and at the
                             // Poisson limit
  bool theta_at_limit = false;  // negbin: ML theta ran past theta_max; the fit is the Poisson fit
  double theta_std_error = 0;   // negbin: 1/sqrt(observed information in theta); NaN at the
                                // Poisson limit and for other families
  int rank = 0;              // number of non-aliased columns
  int df_residual = 0;       // n - rank
  int n = 0;                 // records used: positive prior weight and valid values
  int iterations = 0;        // IRLS iterations (summed over theta steps for negbin)
};

struct FitResult : FitFigures {
  // Length p (columns of X), also on failure. Aliased columns have
  // coefficient 0 and zero rows/columns in `covariance`, and are flagged in
  // `aliased`. When status is failed, coefficients and covariance are all 0
  // and every column is flagged aliased: nothing was estimated.
  Eigen::VectorXd coefficients;
  std::vector<bool> aliased;
  // Covariance of the estimates: inverse Fisher information (X'WX)^{-1}
  // with W the working weights at the fitted means, multiplied by
  // `dispersion` for quasi-Poisson (as R's summary.glm does).
  Eigen::MatrixXd covariance;
};

// Fits y ~ X with `offset` (added to the linear predictor, e.g. log exposure)
// and non-negative prior `weights` (0 leaves a record out).
// Preconditions: none that can make it throw. Expected: X.rows() == y.size()
// == offset.size() == weights.size() (else failed); y holds non-negative
// integer counts. A record with a non-finite or negative count, weight or
// offset, or a non-finite entry in its row of X, is left out as if its
// weight were 0 and counted in `note`.
// `start`, when non-null and of length p, is used as the initial
// coefficients (a warm start) if it gives valid means; otherwise mu starts
// at y + 0.1 as in R.
// Column 0 is treated as the intercept for the null deviance when
// `has_intercept` is true.
FitResult fit_glm(const Eigen::MatrixXd& X, const Eigen::VectorXd& y, const Eigen::VectorXd& offset,
                  const Eigen::VectorXd& weights, const FitOptions& options,
                  const Eigen::VectorXd* start = nullptr, bool has_intercept = true);

}  // namespace tallyd::glm
