// SeriesModel's steps between full refits (model.step_between_refits):
// starting the sums after a refit, one Newton step per record, recentring
// when a step strays. The sums themselves are series/window_step.h; the
// records leaving the window take their terms out in drop_oldest
// (series_model.cc).
#include "series/series_model.h"

#include <cmath>
#include <limits>
#include <memory>

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
  if (!season_cache_ok()) return row_for(time, exposure_at(i), cov, steps_->x);
  const DesignInput in{time, origin_.value_or(time), exposure_at(i), cov};
  return design_row(settings_->model, in, season_values_.row(i), steps_->x);
}

void SeriesModel::start_steps(const Eigen::VectorXd& fit_weights, const Correction& correction, double gamma,
                              const glm::SmallFit& small) {
  // The weights' ring grows to the window's record limit, as the history's.
  if (!steps_)
    steps_ = std::make_unique<Steps>(
        settings_->model.window.records.value_or(std::numeric_limits<std::size_t>::max()));
  Steps& st = *steps_;
  st.correction = correction;
  st.gamma = gamma;
  Eigen::VectorXd beta_star = fit_.coefficients();
  if (beta_star.size() > 0) beta_star(0) += correction.mean_shift;  // the resistant fit's own intercept
  st.sums.reset(beta_star, settings_->model.family, fit_.theta);
  st.x.resize(p_);
  st.cx.resize(p_);
  st.beta.resize(p_);
  st.fit_weights.clear();
  // The fast fit's means at beta* when it ended there (no mean correction
  // moved the intercept): no exp per record.
  const bool means_known = small.estimate_at(beta_star) && small.mu().size() == X_.rows();
  for (Eigen::Index i = 0; i < X_.rows(); ++i) {
    st.x = X_.row(i);
    if (means_known) st.sums.account_mean(st.x.data(), small.mu()(i), y_(i), fit_weights(i), 1);
    else st.sums.account(st.x.data(), offset_(i), y_(i), fit_weights(i), 1);
    *st.fit_weights.push_back() = fit_weights(i);
  }
  const std::size_t n = st.sums.rows();
  st.phi_start = n > static_cast<std::size_t>(p_) ? st.sums.pearson() / static_cast<double>(n - p_) : 1;
  if (!(st.phi_start > 0)) st.phi_start = 1;
}

double SeriesModel::step_weight(double offset, double y, double prior) {
  const ModelSpec& spec = settings_->model;
  if (!spec.reweight || !(prior > 0)) return prior;
  // As resistant_weights, against the published fit.
  Steps& st = *steps_;
  const double eta = st.x.dot(fit_.coefficients()) + offset;
  const double mu = std::exp(eta);
  if (!std::isfinite(mu)) return st.gamma * prior;
  st.cx.noalias() = fit_.covariance() * st.x.transpose();
  const double quadratic = st.x.dot(st.cx);
  const double s = outlying_residual(fit_, y, mu, mu, prior, quadratic);  // log link: d mu / d eta = mu
  return st.gamma * (s > 0 ? prior / (s * s) : prior);
}

void SeriesModel::step_forward() {
  Steps& st = *steps_;
  const std::size_t guard = settings_->model.guard_records;
  while (st.fit_weights.size() + guard < records_.size()) {
    const std::size_t i = st.fit_weights.size();
    const double offset = stored_row(i);
    const double y = static_cast<double>(count_at(i));
    const double w = step_weight(offset, y, weight_at(i));
    st.sums.account(st.x.data(), offset, y, w, 1);
    *st.fit_weights.push_back() = w;
  }
  if (!st.sums.solve(st.beta)) {
    refit(RefitCause::step_limit);  // no step from these sums (an aliased column): the full fit decides
    return;
  }
  const std::size_t n = st.sums.rows();
  const double scale = settings_->model.family == glm::Family::quasipoisson ? st.phi_start : 1.0;
  const auto phi_now = [&] {
    return n > static_cast<std::size_t>(p_) ? st.sums.pearson() / static_cast<double>(n - p_) : 0;
  };
  const auto far = [&] { return !(st.sums.distance2(st.beta) <= kMaxStepDistance * kMaxStepDistance * scale); };
  // On a window that no longer fits beta*: refit fully.
  if (!(phi_now() <= kMaxStepDispersionGrowth * st.phi_start)) {
    refit(RefitCause::step_limit);
    return;
  }
  if (far()) {
    // Far from beta*: take the sums again at the step's coefficients (one
    // more Fisher scoring iteration on this window, with the weights the
    // records entered with) and step from there; refit fully only if that
    // too strays, or its window no longer fits.
    recentre_steps();
    if (!st.sums.solve(st.beta) || far() || !(phi_now() <= kMaxStepDispersionGrowth * st.phi_start)) {
      refit(RefitCause::step_limit);
      return;
    }
  }
  fit_.coefficients() = st.beta;
  if (fit_.coefficients().size() > 0) fit_.coefficients()(0) -= st.correction.mean_shift;
  fit_.n = static_cast<int>(n);
  fit_.df_residual = static_cast<int>(n) - p_;
  if (settings_->model.family == glm::Family::quasipoisson && fit_.df_residual > 0) {
    fit_.dispersion = st.sums.pearson() / fit_.df_residual / st.correction.dispersion_divisor;
    st.sums.inverse(fit_.dispersion, fit_.covariance());
  } else {
    st.sums.inverse(1.0, fit_.covariance());
  }
}

void SeriesModel::recentre_steps() {
  Steps& st = *steps_;
  ++steps_recentred_;
  st.sums.reset(st.beta, settings_->model.family, fit_.theta);
  for (std::size_t i = 0; i < st.fit_weights.size(); ++i) {
    const double offset = stored_row(i);
    st.sums.account(st.x.data(), offset, static_cast<double>(count_at(i)), *st.fit_weights.row(i), 1);
  }
}

}  // namespace tallyd
