// The scratch of one refit of a series' window, and the outbreak-resistant
// reweighting that reads it (series/series_model.cc drives them).
//
// Each fit goes through glm::SmallFit when it applies and to glm::fit_glm
// otherwise (glm/small_fit.h says when); either way the result is
// fit_glm's up to rounding.
// Built, used and freed within one refit, so an idle series holds none of it.
// Not thread-safe.
#pragma once

#include <Eigen/Dense>

#include "glm/fit.h"
#include "glm/small_fit.h"
#include "series/model_spec.h"

namespace tallyd {

struct RefitWork {
  Eigen::MatrixXd X;                   // n x p design
  Eigen::VectorXd y, offset, weights;  // n each; weights are the prior weights
  glm::SmallFit small;                 // the fast path's workspace, reading the above

  // Call once X, y and offset are filled (and before any fit).
  void ready() { small.use(X, y, offset); }
};

// fit_glm(X, y, offset, weights, options, start, true) of the work's design,
// through glm::SmallFit when it applies (a warm start is needed) and
// fit_glm otherwise. `weights` has n values.
glm::FitResult fit_window(RefitWork& work, const Eigen::VectorXd& weights,
                          const glm::FitOptions& options, const Eigen::VectorXd* start);

// Prior weights for the resistant refit after `fit` of the work's design:
// records with standardized Anscombe residual above spec.reweight_threshold
// get weight / residual^2, all rescaled to the same total (Farrington et al.
// 1996). Empty when no record is down-weighted.
Eigen::VectorXd resistant_weights(const ModelSpec& spec, const RefitWork& work,
                                  const glm::FitResult& fit);

// Divides a resistant quasi-Poisson fit's phi (and covariance) by the
// expected shrinkage of the weighted Pearson statistic, and with
// spec.reweight_mean_correction (log link) its mean by the expected
// shrinkage of the weighted mean (series/resistant_dispersion.h).
void correct_resistant_fit(const ModelSpec& spec, const RefitWork& work, glm::FitResult& result);

}  // namespace tallyd
