#include "series/series_model.h"

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <limits>

#include "glm/small_fit.h"
#include "series/design.h"
#include "series/resistant_dispersion.h"

namespace tallyd {
namespace {

// The most rows a series' history rings grow to on their own.
std::size_t window_rows(const ModelSpec& spec) {
  return spec.window.records.value_or(std::numeric_limits<std::size_t>::max());
}

}  // namespace

SeriesModel::SeriesModel(std::string id, const SeriesSettings& settings)
    : id_(std::move(id)),
      settings_(&settings),
      p_(coefficient_count(settings.model)),
      records_(1, window_rows(settings.model)),
      wide_(1, window_rows(settings.model)),
      covariate_values_(settings.model.covariates.size(), window_rows(settings.model)),
      scales_(2, window_rows(settings.model)),
      season_values_(static_cast<std::size_t>(season_column_count(settings.model)), window_rows(settings.model)),
      seasons_per_row_(season_column_count(settings.model)),
      quantile_(bounds::upper_quantile(settings.alert.alpha)) {}

std::optional<std::string> SeriesModel::missing_covariate(const Observation& obs) const {
  for (const std::string& name : settings_->model.covariates)
    if (obs.covariate(name) == nullptr) return name;
  return std::nullopt;
}

std::size_t SeriesModel::min_history() const {
  return std::max(settings_->model.min_history, static_cast<std::size_t>(p_) + 2);
}

bool SeriesModel::ready() const {
  return has_fit_ && records_.size() >= min_history() + settings_->model.guard_records;
}

std::optional<TimePoint> SeriesModel::last_time() const {
  if (records_.empty()) return std::nullopt;
  return newest_;
}

double SeriesModel::row_for(TimePoint time, double exposure, const double* covariates,
                            RowRef row) const {
  DesignInput in{time, origin_.value_or(time), exposure, covariates};
  return design_row(settings_->model, in, row);
}

Prediction SeriesModel::predict(const Observation& obs, bool allow_screen) const {
  // No allocation per record for the usual model sizes: the design row, the
  // covariates and Cov * x live on the stack (heap beyond kStackColumns).
  // The products are Eigen's, on aligned maps of dynamic size, so they run
  // the same kernels in the same order as on heap vectors: the same bits.
  constexpr std::size_t kStackColumns = 16;
  alignas(64) double x_stack[kStackColumns];
  alignas(64) double cx_stack[kStackColumns];
  double cov_stack[kStackColumns];
  std::vector<double> heap;
  const std::size_t columns = static_cast<std::size_t>(p_);
  const std::size_t covariates = settings_->model.covariates.size();
  double* x_data = x_stack;
  double* cx_data = cx_stack;
  double* cov = cov_stack;
  if (columns > kStackColumns || covariates > kStackColumns) {
    heap.resize(2 * columns + covariates + 8);
    // Aligned16 below: start both vectors on a 16-byte boundary.
    double* base = heap.data() + (reinterpret_cast<std::uintptr_t>(heap.data()) % 16 == 0 ? 0 : 1);
    x_data = base;
    cx_data = base + columns + (columns % 2);
    cov = cx_data + columns + (columns % 2);
  }
  for (std::size_t i = 0; i < covariates; ++i) {
    const double* v = obs.covariate(settings_->model.covariates[i]);
    cov[i] = v ? *v : std::numeric_limits<double>::quiet_NaN();
  }
  Eigen::Map<Eigen::RowVectorXd, Eigen::Aligned16> x(x_data, p_);
  const double offset = row_for(obs.time, obs.exposure, cov, x);

  Prediction out;
  const double linear = x.dot(fit_.coefficients());
  Eigen::Map<Eigen::VectorXd, Eigen::Aligned16> cx(cx_data, p_);
  cx.noalias() = fit_.covariance() * x.transpose();
  out.predictor.eta_mean = linear + offset;
  out.predictor.eta_variance = std::max(0.0, x.dot(cx));
  out.noise.family = settings_->model.family;
  out.noise.link = settings_->model.link;
  out.noise.dispersion = fit_.dispersion;
  out.noise.theta = fit_.theta;

  const AlertSpec& a = settings_->alert;
  bounds::Options options;
  options.method = a.method;
  options.draws = a.draws;
  options.quadrature_nodes = a.quadrature_nodes;
  options.grid_node_limit = a.grid_node_limit;
  options.alpha = a.alpha;
  options.quantile = quantile_;
  options.screen = allow_screen && a.screen;
  // The engine refits on doubt unless both floors exceed this (engine.h):
  // the screen's cheapest floors must not make it refit more often.
  if (settings_->model.refit_on_doubt && since_refit_ > 0) options.wanted_floor = settings_->model.doubt_factor * a.alpha;
  if (a.method == bounds::Method::simulate) {
    bounds::Rng rng = bounds::Rng::for_record(a.seed, id_, obs.time.time_since_epoch().count());
    out.bounds = bounds::evaluate(out.predictor, out.noise, obs.count, options, &rng);
  } else {
    out.bounds = bounds::evaluate(out.predictor, out.noise, obs.count, options, nullptr);
  }
  return out;
}

bool SeriesModel::season_cache_ok() const {
  return seasons_per_row_ == 0 || season_values_.size() == records_.size();
}

void SeriesModel::push_season_values(TimePoint time) {
  season_columns(settings_->model, time, season_values_.push_back());
}

void SeriesModel::fill_season_cache() {
  season_values_.clear();
  season_values_.reserve(records_.size());
  for (std::size_t i = 0; i < records_.size(); ++i) push_season_values(time_at(i));
}

void SeriesModel::learn(const Observation& obs, double weight) {
  if (!origin_) origin_ = obs.time;
  if (!season_cache_ok()) fill_season_cache();  // restored from a checkpoint
  // Room first, so that a window of R records never needs a block of R + 1
  // rows: dropping the oldest before the push leaves the same window as
  // dropping it after (trim_window drops a prefix either way).
  const std::optional<std::size_t> limit = settings_->model.window.records;
  if (limit && *limit > 0 && records_.size() >= *limit) drop_oldest(records_.size() - *limit + 1);
  push_record(obs.time, obs.count);
  push_scales(obs.exposure, weight);
  newest_ = obs.time;
  if (!settings_->model.covariates.empty()) {
    double* row = covariate_values_.push_back();
    for (const std::string& name : settings_->model.covariates) {
      const double* v = obs.covariate(name);
      *row++ = v ? *v : 0.0;
    }
  }
  if (seasons_per_row_ > 0) push_season_values(obs.time);
  trim_window(obs.time);
  ++since_refit_;
  // A restored series has no step sums: it refits at its first record.
  const bool steps = steps_on();
  const ModelSpec& spec = settings_->model;
  if (records_.size() >= min_history() + spec.guard_records) {
    RefitCause cause = RefitCause::asked;
    if (!has_fit_) cause = RefitCause::first;
    else if (records_.size() < spec.cadence_from) cause = RefitCause::warm_up;
    else if (since_refit_ >= spec.refit_every) cause = RefitCause::cadence;
    else if (steps && !stepping()) cause = RefitCause::no_sums;
    if (cause != RefitCause::asked) {
      refit(cause);
      return;
    }
  }
  if (steps && stepping()) {
    step_forward();
  }
}

void SeriesModel::drop_oldest(std::size_t rows) {
  if (stepping()) {
    // The records leaving the window take their terms out of the sums.
    Steps& st = *steps_;
    const std::size_t in_fit = std::min(rows, st.fit_weights.size());
    for (std::size_t i = 0; i < in_fit; ++i) {
      const double offset = stored_row(i);
      st.sums.account(st.x.data(), offset, static_cast<double>(count_at(i)), *st.fit_weights.row(i), -1);
    }
    st.fit_weights.pop_front(in_fit);
  }
  records_.pop_front(rows);
  if (!wide_.empty()) wide_.pop_front(rows);
  if (!scales_.empty()) scales_.pop_front(rows);
  if (!settings_->model.covariates.empty()) covariate_values_.pop_front(rows);
  if (seasons_per_row_ > 0) {
    // A cache out of step (a restored model before its first learn) is refilled by learn().
    if (season_values_.size() == records_.size() + rows) season_values_.pop_front(rows);
    else season_values_.clear();
  }
}

void SeriesModel::trim_window(TimePoint latest) {
  const Window& w = settings_->model.window;
  std::size_t drop = 0;
  if (w.span) {
    while (drop < records_.size() && time_at(drop) <= latest - *w.span) ++drop;
  }
  if (w.records && records_.size() - drop > *w.records) drop = records_.size() - *w.records;
  if (drop > 0) drop_oldest(drop);
}

void SeriesModel::build_design(Eigen::MatrixXd& X, Eigen::VectorXd& y, Eigen::VectorXd& offset,
                               Eigen::VectorXd& weights, std::size_t rows) const {
  const std::size_t n = std::min(rows, records_.size());
  X.resize(static_cast<Eigen::Index>(n), p_);
  y.resize(static_cast<Eigen::Index>(n));
  offset.resize(static_cast<Eigen::Index>(n));
  weights.resize(static_cast<Eigen::Index>(n));
  const bool cached = season_cache_ok();
  for (std::size_t i = 0; i < n; ++i) {
    const TimePoint time = time_at(i);
    const double* cov = covariate_values_.row(i);
    const auto row = static_cast<Eigen::Index>(i);
    if (!cached) {
      offset(row) = row_for(time, exposure_at(i), cov, X.row(row));
    } else {
      // The same row as row_for, with the seasonal columns kept since learn().
      const DesignInput in{time, origin_.value_or(time), exposure_at(i), cov};
      offset(row) = design_row(settings_->model, in, season_values_.row(i), X.row(row));
    }
    y(row) = static_cast<double>(count_at(i));
    weights(row) = weight_at(i);
  }
}

glm::FitOptions SeriesModel::fit_options() const {
  glm::FitOptions options;
  options.family = settings_->model.family;
  options.link = settings_->model.link;
  return options;
}

void SeriesModel::refit(RefitCause cause) {
  since_refit_ = 0;
  const std::uint64_t fits_before = fits_done_;
  // The guard band: the newest guard_records records stay out of the fit
  // that judges the next record, so an outbreak's first weeks cannot pull
  // the baseline up before they have been judged a few more times.
  const std::size_t guard = settings_->model.guard_records;
  if (records_.size() <= guard) return;
  build_design(X_, y_, offset_, weights_, records_.size() - guard);

  glm::FitOptions options = fit_options();
  options.null_deviance = false;  // not needed for judging; fit_report() asks for it
  if (has_fit_ && std::isfinite(fit_.theta)) options.start_theta = fit_.theta;
  Eigen::VectorXd start_values;
  if (has_fit_) start_values = fit_.coefficients();
  const Eigen::VectorXd* start = has_fit_ ? &start_values : nullptr;

  // Warm-started fits of a narrow log-link design take the one-pass path
  // (glm/small_fit.h), which leaves every hard case to fit_glm.
  glm::SmallFit small;
  small.use(X_, y_, offset_);
  glm::FitResult result = glm::fit_fast_or_general(small, X_, y_, offset_, weights_, options, start);
  ++fits_done_;
  last_fit_status_ = result.status;
  last_fit_note_ = result.note;
  // A failed fit keeps the previous coefficients; a non-converged one is used
  // only when there is nothing better.
  const bool steps = steps_on();
  Eigen::VectorXd fit_weights;
  if (steps) fit_weights = weights_;
  Correction correction;
  double gamma = 1;
  if (result.status == glm::FitStatus::ok && settings_->model.reweight) {
    // Outbreak-resistant refit: down-weight outlying records and fit once
    // more from the previous fit (Farrington et al. 1996; Noufaily et al.
    // 2013). With reweight_rounds > 1 the weights are recomputed (from the
    // prior weights) against the latest resistant fit and its corrected
    // dispersion, until no record is down-weighted or the rounds run out:
    // judged against a first fit that the outbreak itself has inflated, many
    // outbreak records fall below the threshold (masking).
    bool corrected = false;
    for (std::size_t round = 0; round < settings_->model.reweight_rounds; ++round) {
      double round_gamma = 1;
      Eigen::VectorXd resistant = resistant_weights(result, small, &round_gamma);
      if (resistant.size() == 0) break;
      glm::FitResult next =
          glm::fit_fast_or_general(small, X_, y_, offset_, resistant, options, &result.coefficients);
      ++fits_done_;
      if (next.status != glm::FitStatus::ok) break;
      result = std::move(next);
      correction = correct_resistant_fit(result, small);
      corrected = true;
      if (steps) fit_weights = std::move(resistant);
      gamma = round_gamma;
    }
    if (!corrected) correction = correct_resistant_fit(result, small);
  }
  const bool converged = result.status == glm::FitStatus::ok;
  if (converged || (result.status == glm::FitStatus::not_converged && !has_fit_)) {
    fit_.assign(result);
    has_fit_ = true;
  }
  // Steps start only from a converged fit; otherwise the next record refits.
  if (steps && converged) start_steps(fit_weights, correction, gamma, small);
  else if (steps_) steps_->sums.clear();
  release_workspace();
  fits_by_cause_[static_cast<std::size_t>(cause)] += static_cast<std::uint32_t>(fits_done_ - fits_before);
}

SeriesModel::Correction SeriesModel::correct_resistant_fit(glm::FitResult& result,
                                                           const glm::SmallFit& small) const {
  // The weighted Pearson statistic of the resistant fit lacks the largest
  // residuals, so its quasi-Poisson phi runs low even with no outbreak;
  // divide by the expected shrinkage (series/resistant_dispersion.h). The
  // factor is an average over windows with and without a down-weighted
  // record, so it applies to both (with none, the first fit is the
  // resistant fit). Taking the first fit's phi instead would let past
  // outbreaks widen every later bound, which the reweighting is there to
  // prevent. With model.reweight_mean_correction (log link) the fitted mean
  // is divided by its expected shrinkage likewise.
  const ModelSpec& spec = settings_->model;
  const bool quasi = spec.family == glm::Family::quasipoisson && result.dispersion > 0;
  const bool mean_fix = spec.reweight_mean_correction && spec.link == glm::Link::log;
  Correction applied;
  if (!quasi && !mean_fix) return applied;
  // At the window's average fitted mean, and at the corrected phi (one
  // step: the factor moves slowly with phi).
  double mean_sum = 0;
  if (spec.link == glm::Link::log && small.estimate_at(result.coefficients)) {
    // exp(eta) at these coefficients, summed in the same order as below.
    const Eigen::VectorXd& mu = small.mu();
    for (Eigen::Index i = 0; i < mu.size(); ++i) mean_sum += mu(i);
  } else {
    const Eigen::VectorXd eta = X_ * result.coefficients + offset_;
    for (Eigen::Index i = 0; i < eta.size(); ++i) mean_sum += glm::link_inv(spec.link, eta(i));
  }
  const double mean = mean_sum / static_cast<double>(X_.rows());
  const double threshold = spec.reweight_threshold;
  double index = 1;  // the noise's dispersion index at the mean
  if (quasi) index = result.dispersion / normal_reweighted_dispersion_factor(threshold);
  else if (spec.family == glm::Family::negbin && std::isfinite(result.theta) && result.theta > 0)
    index = 1 + mean / result.theta;
  const ReweightedMoments moments = reweighted_moments(threshold, mean, index);
  if (quasi) {
    result.covariance /= moments.dispersion_factor;
    result.dispersion /= moments.dispersion_factor;
    applied.dispersion_divisor = moments.dispersion_factor;
  }
  if (mean_fix && moments.mean_factor > 0 && result.coefficients.size() > 0) {
    applied.mean_shift = std::log(moments.mean_factor);
    result.coefficients(0) -= applied.mean_shift;  // column 0 is the intercept (series/design.h)
  }
  return applied;
}

void SeriesModel::release_workspace() {
  // An n x p design per idle series would be most of its memory (window 156,
  // 8 coefficients: ~10 KiB of ~16); rebuilding it costs a few allocations
  // next to an IRLS fit.
  X_.resize(0, 0);
  y_.resize(0);
  offset_.resize(0);
  weights_.resize(0);
}

double SeriesModel::outlying_residual(const glm::FitFigures& fit, double y, double mu, double d, double prior,
                                     double quadratic) const {
  if (!(mu > 1e-12)) return 0;
  const double threshold = settings_->model.reweight_threshold;
  // The Anscombe residual has the sign of y - mu: a record at or below its
  // mean cannot pass a non-negative threshold.
  if (threshold >= 0 && !(y > mu)) return 0;
  const glm::Family family = settings_->model.family;
  const double phi = family == glm::Family::quasipoisson && std::isfinite(fit.dispersion) && fit.dispersion > 0
                         ? fit.dispersion
                         : 1.0;
  const bool nb = family == glm::Family::negbin && std::isfinite(fit.theta) && fit.theta > 0;
  const double variance = nb ? mu + mu * mu / fit.theta : mu;
  // Leverage h = w x' (X'WX)^-1 x with Cov = phi (X'WX)^-1 for quasi-Poisson.
  const double working = prior * d * d / variance;
  const double h = std::clamp(working * quadratic / phi, 0.0, 0.99);
  const double index = nb ? 1 + mu / fit.theta : phi;
  const double spread = std::sqrt(index * (1 - h));
  // Most records above their mean are far below the threshold: they skip
  // the two cube roots (glibc's cbrt costs about three exps).
  if (threshold >= 0 && anscombe_surely_within(y, mu, spread, threshold)) return 0;
  // Poisson Anscombe residual; its variance is about the dispersion index
  // (phi, or 1 + mu / theta for NB2). mu^(1/6) is the square root of the
  // square root of mu^(2/3).
  const double mu23 = std::cbrt(mu * mu);
  const double anscombe = 1.5 * (std::cbrt(y * y) - mu23) / std::sqrt(std::sqrt(mu23));
  const double s = anscombe / spread;
  return s > threshold ? s : 0;
}

Eigen::VectorXd SeriesModel::resistant_weights(const glm::FitResult& fit, const glm::SmallFit& small,
                                               double* gamma) const {
  const Eigen::Index n = X_.rows();
  const glm::Link link = settings_->model.link;
  const double threshold = settings_->model.reweight_threshold;
  Eigen::VectorXd w = weights_;
  bool any = false;
  // The linear predictors and means of all records: the fast fit's when it
  // ended at these coefficients (exp(eta) there too), else one product.
  const bool known = link == glm::Link::log && small.estimate_at(fit.coefficients);
  Eigen::VectorXd eta;
  if (!known) {
    eta.noalias() = X_ * fit.coefficients;
    eta += offset_;
  }
  const Eigen::MatrixXd& cov = fit.covariance;
  for (Eigen::Index i = 0; i < n; ++i) {
    if (weights_(i) <= 0) continue;
    const double eta_i = known ? small.eta()(i) : eta(i);
    const double mu = known ? small.mu()(i) : glm::link_inv(link, eta_i);
    // A record at or below its mean is not outlying for a threshold >= 0
    // (outlying_residual): it needs no quadratic form x' Cov x.
    if (threshold >= 0 && !(y_(i) > mu)) continue;
    // Under the log link d mu / d eta is exp(eta) again: reuse it.
    const double d = link == glm::Link::log ? mu : glm::mu_eta(link, eta_i);
    double quadratic = 0;  // sum_j x_j (x' Cov)_j
    for (Eigen::Index j = 0; j < X_.cols(); ++j) {
      double column = 0;
      for (Eigen::Index k = 0; k < X_.cols(); ++k) column += X_(i, k) * cov(k, j);
      quadratic += column * X_(i, j);
    }
    const double s = outlying_residual(fit, y_(i), mu, d, weights_(i), quadratic);
    if (s > 0) {
      w(i) = weights_(i) / (s * s);
      any = true;
    }
  }
  if (!any) return {};
  // gamma: keep the total prior weight (Farrington et al. 1996).
  const double total = w.sum();
  if (!(total > 0)) return {};
  const double scale = weights_.sum() / total;
  w *= scale;
  if (gamma != nullptr) *gamma = scale;
  return w;
}

glm::FitResult SeriesModel::fit_report() const {
  Eigen::MatrixXd X;
  Eigen::VectorXd y, offset, weights;
  build_design(X, y, offset, weights, records_.size());
  return glm::fit_glm(X, y, offset, weights, fit_options(), nullptr, true);
}

}  // namespace tallyd
