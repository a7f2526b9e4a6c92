#include "series/refit_work.h"

#include <algorithm>
#include <cmath>

#include "series/resistant_dispersion.h"

namespace tallyd {
namespace {

// Linear predictors and means of the work's records at `coefficients`:
// read from the fast path when it has just fitted them, else computed.
// The pointers are set to the values (the work's or `eta`/`mu`).
void predictors_at(glm::Link link, const RefitWork& work, const Eigen::VectorXd& coefficients,
                   Eigen::VectorXd& eta, Eigen::VectorXd& mu, const Eigen::VectorXd*& eta_out,
                   const Eigen::VectorXd*& mu_out) {
  if (link == glm::Link::log && work.small.estimate_at(coefficients)) {
    eta_out = &work.small.eta();
    mu_out = &work.small.mu();
    return;
  }
  eta.noalias() = work.X * coefficients;
  eta += work.offset;
  mu.resize(eta.size());
  for (Eigen::Index i = 0; i < eta.size(); ++i) mu(i) = glm::link_inv(link, eta(i));
  eta_out = &eta;
  mu_out = &mu;
}

}  // namespace

glm::FitResult fit_window(RefitWork& work, const Eigen::VectorXd& weights,
                          const glm::FitOptions& options, const Eigen::VectorXd* start) {
  if (start != nullptr && glm::SmallFit::applies(options, static_cast<int>(work.X.cols()))) {
    glm::FitResult result;
    if (work.small.fit(weights, options, *start, result)) return result;
  }
  return glm::fit_glm(work.X, work.y, work.offset, weights, options, start, true);
}

Eigen::VectorXd resistant_weights(const ModelSpec& spec, const RefitWork& work,
                                  const glm::FitResult& fit) {
  const Eigen::Index n = work.X.rows();
  const glm::Family family = spec.family;
  const glm::Link link = spec.link;
  const double phi = family == glm::Family::quasipoisson && std::isfinite(fit.dispersion) && fit.dispersion > 0
                         ? fit.dispersion
                         : 1.0;
  const bool nb = family == glm::Family::negbin && std::isfinite(fit.theta) && fit.theta > 0;
  const double threshold = spec.reweight_threshold;
  const Eigen::VectorXd& prior = work.weights;
  Eigen::VectorXd eta_own, mu_own;
  const Eigen::VectorXd* eta = nullptr;
  const Eigen::VectorXd* means = nullptr;
  predictors_at(link, work, fit.coefficients, eta_own, mu_own, eta, means);
  Eigen::VectorXd w = prior;
  bool any = false;
  // The quadratic forms x' Cov x of all records in one matrix product,
  // rather than a small product per record.
  const Eigen::MatrixXd xc = work.X * fit.covariance;
  const Eigen::VectorXd quadratic = xc.cwiseProduct(work.X).rowwise().sum();
  for (Eigen::Index i = 0; i < n; ++i) {
    if (prior(i) <= 0) continue;
    const double mu = (*means)(i);
    if (!(mu > 1e-12)) continue;
    const double y = work.y(i);
    // The Anscombe residual has the sign of y - mu: a record at or below its
    // mean cannot pass a non-negative threshold.
    if (threshold >= 0 && !(y > mu)) continue;
    const double variance = nb ? mu + mu * mu / fit.theta : mu;
    // Under the log link d mu / d eta is exp(eta) again: reuse it.
    const double d = link == glm::Link::log ? mu : glm::mu_eta(link, (*eta)(i));
    // Leverage h = w x' (X'WX)^-1 x with Cov = phi (X'WX)^-1 for quasi-Poisson.
    const double working = prior(i) * d * d / variance;
    const double h = std::clamp(working * quadratic(i) / phi, 0.0, 0.99);
    const double index = nb ? 1 + mu / fit.theta : phi;
    const double spread = std::sqrt(index * (1 - h));
    // s (below) > threshold means y^(2/3) > mu^(2/3) + c mu^(1/6) with
    // c = threshold spread / 1.5, i.e. y^2 above the cube of the right side:
    //   mu^2 + 3 c mu^(3/2) + 3 c^2 mu + c^3 mu^(1/2),
    // which takes one square root. A count whose square is below that by
    // far more than rounding cannot pass: most records above their mean are
    // such, and skip the two cube roots.
    if (threshold >= 0) {
      const double c = threshold * spread / 1.5;
      const double root_mu = std::sqrt(mu);
      const double cut_cubed = mu * mu + 3 * c * mu * root_mu + 3 * c * c * mu + c * c * c * root_mu;
      if (y * y < cut_cubed * (1 - 1e-9)) continue;
    }
    // Poisson Anscombe residual; its variance is about the dispersion index
    // (phi, or 1 + mu / theta for NB2). mu^(1/6) is the square root of the
    // square root of mu^(2/3).
    const double mu23 = std::cbrt(mu * mu);
    const double anscombe = 1.5 * (std::cbrt(y * y) - mu23) / std::sqrt(std::sqrt(mu23));
    const double s = anscombe / spread;
    if (s > threshold) {
      w(i) = prior(i) / (s * s);
      any = true;
    }
  }
  if (!any) return {};
  // gamma: keep the total prior weight (Farrington et al. 1996).
  const double total = w.sum();
  if (!(total > 0)) return {};
  w *= prior.sum() / total;
  return w;
}

void correct_resistant_fit(const ModelSpec& spec, const RefitWork& work, glm::FitResult& result) {
  // The weighted Pearson statistic of the resistant fit lacks the largest
  // residuals, so its quasi-Poisson phi runs low even with no outbreak;
  // divide by the expected shrinkage (series/resistant_dispersion.h). The
  // factor is an average over windows with and without a down-weighted
  // record, so it applies to both (with none, the first fit is the
  // resistant fit). Taking the first fit's phi instead would let past
  // outbreaks widen every later bound, which the reweighting is there to
  // prevent. With model.reweight_mean_correction (log link) the fitted mean
  // is divided by its expected shrinkage likewise.
  const bool quasi = spec.family == glm::Family::quasipoisson && result.dispersion > 0;
  const bool mean_fix = spec.reweight_mean_correction && spec.link == glm::Link::log;
  if (!quasi && !mean_fix) return;
  // At the window's average fitted mean, and at the corrected phi (one
  // step: the factor moves slowly with phi).
  Eigen::VectorXd eta_own, mu_own;
  const Eigen::VectorXd* eta = nullptr;
  const Eigen::VectorXd* means = nullptr;
  predictors_at(spec.link, work, result.coefficients, eta_own, mu_own, eta, means);
  double mean_sum = 0;
  for (Eigen::Index i = 0; i < means->size(); ++i) mean_sum += (*means)(i);
  const double mean = mean_sum / static_cast<double>(means->size());
  const double threshold = spec.reweight_threshold;
  double index = 1;  // the noise's dispersion index at the mean
  if (quasi) index = result.dispersion / normal_reweighted_dispersion_factor(threshold);
  else if (spec.family == glm::Family::negbin && std::isfinite(result.theta) && result.theta > 0)
    index = 1 + mean / result.theta;
  const ReweightedMoments moments = reweighted_moments(threshold, mean, index);
  if (quasi) {
    result.covariance /= moments.dispersion_factor;
    result.dispersion /= moments.dispersion_factor;
  }
  if (mean_fix && moments.mean_factor > 0 && result.coefficients.size() > 0)
    result.coefficients(0) -= std::log(moments.mean_factor);  // column 0 is the intercept (series/design.h)
}

}  // namespace tallyd
