// SeriesModel's steps between full refits (model.step_between_refits):
// starting the sums after a refit, one Newton step per record, recentring
// when a step strays. The sums themselves are series/window_step.h; the
// records leaving the window take their terms out in drop_oldest
// (series_model.cc).
#include "series/series_model.h"

#include <cmath>

#include "glm/small_fit.h"
#include "series/design.h"

namespace tallyd {

bool SeriesModel::steps_on() const {
  const ModelSpec& spec = settings_->model;
  return spec.step_between_refits && spec.refit_every > 1 && spec.link == glm::Link::log;
}

double SeriesModel::stored_row(std::size_t i) {
  const TimePoint time = time_at(i);
  const double* cov = covariate_values_.row(i);
  if (!season_cache_ok()) return row_for(time, exposure_at(i), cov, step_x_);
  const DesignInput in{time, origin_.value_or(time), exposure_at(i), cov};
  return design_row(settings_->model, in, season_values_.row(i), step_x_);
}

void SeriesModel::start_steps(const Eigen::VectorXd& fit_weights, const Correction& correction, double gamma,
                              const glm::SmallFit& small) {
  step_correction_ = correction;
  step_gamma_ = gamma;
  Eigen::VectorXd beta_star = fit_.coefficients();
  if (beta_star.size() > 0) beta_star(0) += correction.mean_shift;  // the resistant fit's own intercept
  step_.reset(beta_star, settings_->model.family, fit_.theta);
  step_x_.resize(p_);
  step_cx_.resize(p_);
  step_beta_.resize(p_);
  fit_weights_.clear();
  // The fast fit's means at beta* when it ended there (no mean correction
  // moved the intercept): no exp per record.
  const bool means_known = small.estimate_at(beta_star) && small.mu().size() == X_.rows();
  for (Eigen::Index i = 0; i < X_.rows(); ++i) {
    step_x_ = X_.row(i);
    if (means_known) step_.account_mean(step_x_.data(), small.mu()(i), y_(i), fit_weights(i), 1);
    else step_.account(step_x_.data(), offset_(i), y_(i), fit_weights(i), 1);
    *fit_weights_.push_back() = fit_weights(i);
  }
  const std::size_t n = step_.rows();
  step_phi_start_ = n > static_cast<std::size_t>(p_) ? step_.pearson() / static_cast<double>(n - p_) : 1;
  if (!(step_phi_start_ > 0)) step_phi_start_ = 1;
}

double SeriesModel::step_weight(double offset, double y, double prior) {
  const ModelSpec& spec = settings_->model;
  if (!spec.reweight || !(prior > 0)) return prior;
  // As resistant_weights, against the published fit.
  const double eta = step_x_.dot(fit_.coefficients()) + offset;
  const double mu = std::exp(eta);
  if (!std::isfinite(mu)) return step_gamma_ * prior;
  step_cx_.noalias() = fit_.covariance() * step_x_.transpose();
  const double quadratic = step_x_.dot(step_cx_);
  const double s = outlying_residual(fit_, y, mu, mu, prior, quadratic);  // log link: d mu / d eta = mu
  return step_gamma_ * (s > 0 ? prior / (s * s) : prior);
}

void SeriesModel::step_forward() {
  const std::size_t guard = settings_->model.guard_records;
  while (fit_weights_.size() + guard < records_.size()) {
    const std::size_t i = fit_weights_.size();
    const double offset = stored_row(i);
    const double y = static_cast<double>(count_at(i));
    const double w = step_weight(offset, y, weight_at(i));
    step_.account(step_x_.data(), offset, y, w, 1);
    *fit_weights_.push_back() = w;
  }
  if (!step_.solve(step_beta_)) {
    refit(RefitCause::step_limit);  // no step from these sums (an aliased column): the full fit decides
    return;
  }
  const std::size_t n = step_.rows();
  const double scale = settings_->model.family == glm::Family::quasipoisson ? step_phi_start_ : 1.0;
  const auto phi_now = [&] {
    return n > static_cast<std::size_t>(p_) ? step_.pearson() / static_cast<double>(n - p_) : 0;
  };
  const auto far = [&] { return !(step_.distance2(step_beta_) <= kMaxStepDistance * kMaxStepDistance * scale); };
  // On a window that no longer fits beta*: refit fully.
  if (!(phi_now() <= kMaxStepDispersionGrowth * step_phi_start_)) {
    refit(RefitCause::step_limit);
    return;
  }
  if (far()) {
    // Far from beta*: take the sums again at the step's coefficients (one
    // more Fisher scoring iteration on this window, with the weights the
    // records entered with) and step from there; refit fully only if that
    // too strays, or its window no longer fits.
    recentre_steps();
    if (!step_.solve(step_beta_) || far() || !(phi_now() <= kMaxStepDispersionGrowth * step_phi_start_)) {
      refit(RefitCause::step_limit);
      return;
    }
  }
  fit_.coefficients() = step_beta_;
  if (fit_.coefficients().size() > 0) fit_.coefficients()(0) -= step_correction_.mean_shift;
  fit_.n = static_cast<int>(n);
  fit_.df_residual = static_cast<int>(n) - p_;
  if (settings_->model.family == glm::Family::quasipoisson && fit_.df_residual > 0) {
    fit_.dispersion = step_.pearson() / fit_.df_residual / step_correction_.dispersion_divisor;
    step_.inverse(fit_.dispersion, fit_.covariance());
  } else {
    step_.inverse(1.0, fit_.covariance());
  }
}

void SeriesModel::recentre_steps() {
  ++steps_recentred_;
  step_.reset(step_beta_, settings_->model.family, fit_.theta);
  for (std::size_t i = 0; i < fit_weights_.size(); ++i) {
    const double offset = stored_row(i);
    step_.account(step_x_.data(), offset, static_cast<double>(count_at(i)), *fit_weights_.row(i), 1);
  }
}

}  // namespace tallyd
