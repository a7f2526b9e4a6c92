#include "series/series_model.h"

#include <algorithm>
#include <cmath>
#include <limits>

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
      seasons_per_row_(season_column_count(settings.model)) {}

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
  return time_at(records_.size() - 1);
}

std::vector<double> SeriesModel::covariates_of(const Observation& obs) const {
  std::vector<double> values;
  values.reserve(settings_->model.covariates.size());
  for (const std::string& name : settings_->model.covariates) {
    const double* v = obs.covariate(name);
    values.push_back(v ? *v : std::numeric_limits<double>::quiet_NaN());
  }
  return values;
}

double SeriesModel::row_for(TimePoint time, double exposure, const double* covariates,
                            RowRef row) const {
  DesignInput in{time, origin_.value_or(time), exposure, covariates};
  return design_row(settings_->model, in, row);
}

Prediction SeriesModel::predict(const Observation& obs, bool allow_screen) const {
  const std::vector<double> cov = covariates_of(obs);
  Eigen::RowVectorXd x(p_);
  const double offset = row_for(obs.time, obs.exposure, cov.data(), x);

  Prediction out;
  const double linear = x.dot(fit_.coefficients);
  const Eigen::VectorXd cx = fit_.covariance * x.transpose();
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
  options.alpha = a.alpha;
  options.screen = allow_screen && a.screen;
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
  if (records_.size() >= min_history() + settings_->model.guard_records &&
      (since_refit_ >= settings_->model.refit_every || !has_fit_ ||
       records_.size() < settings_->model.cadence_from)) {
    refit();
  }
}

void SeriesModel::drop_oldest(std::size_t rows) {
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

void SeriesModel::refit() {
  since_refit_ = 0;
  // The guard band: the newest guard_records records stay out of the fit
  // that judges the next record, so an outbreak's first weeks cannot pull
  // the baseline up before they have been judged a few more times.
  const std::size_t guard = settings_->model.guard_records;
  if (records_.size() <= guard) return;
  build_design(X_, y_, offset_, weights_, records_.size() - guard);

  glm::FitOptions options = fit_options();
  options.null_deviance = false;  // not needed for judging; fit_report() asks for it
  if (has_fit_ && std::isfinite(fit_.theta)) options.start_theta = fit_.theta;
  const Eigen::VectorXd* start = has_fit_ ? &fit_.coefficients : nullptr;

  glm::FitResult result = glm::fit_glm(X_, y_, offset_, weights_, options, start, true);
  ++fits_done_;
  last_fit_status_ = result.status;
  last_fit_note_ = result.note;
  // A failed fit keeps the previous coefficients; a non-converged one is used
  // only when there is nothing better.
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
      Eigen::VectorXd resistant = resistant_weights(result);
      if (resistant.size() == 0) break;
      glm::FitResult next = glm::fit_glm(X_, y_, offset_, resistant, options, &result.coefficients, true);
      ++fits_done_;
      if (next.status != glm::FitStatus::ok) break;
      result = std::move(next);
      correct_resistant_fit(result);
      corrected = true;
    }
    if (!corrected) correct_resistant_fit(result);
  }
  if (result.status == glm::FitStatus::ok ||
      (result.status == glm::FitStatus::not_converged && !has_fit_)) {
    fit_ = std::move(result);
    has_fit_ = true;
  }
  release_workspace();
}

void SeriesModel::correct_resistant_fit(glm::FitResult& result) const {
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
  if (!quasi && !mean_fix) return;
  // At the window's average fitted mean, and at the corrected phi (one
  // step: the factor moves slowly with phi).
  const Eigen::VectorXd eta = X_ * result.coefficients + offset_;
  double mean_sum = 0;
  for (Eigen::Index i = 0; i < eta.size(); ++i) mean_sum += glm::link_inv(spec.link, eta(i));
  const double mean = mean_sum / static_cast<double>(eta.size());
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

void SeriesModel::release_workspace() {
  // An n x p design per idle series would be most of its memory (window 156,
  // 8 coefficients: ~10 KiB of ~16); rebuilding it costs a few allocations
  // next to an IRLS fit.
  X_.resize(0, 0);
  y_.resize(0);
  offset_.resize(0);
  weights_.resize(0);
}

Eigen::VectorXd SeriesModel::resistant_weights(const glm::FitResult& fit) const {
  const Eigen::Index n = X_.rows();
  const glm::Family family = settings_->model.family;
  const glm::Link link = settings_->model.link;
  const double phi = family == glm::Family::quasipoisson && std::isfinite(fit.dispersion) && fit.dispersion > 0
                         ? fit.dispersion
                         : 1.0;
  const bool nb = family == glm::Family::negbin && std::isfinite(fit.theta) && fit.theta > 0;
  const double threshold = settings_->model.reweight_threshold;
  Eigen::VectorXd w = weights_;
  bool any = false;
  // The linear predictors and the quadratic forms x' Cov x of all records in
  // two matrix products, rather than a small product per record.
  Eigen::VectorXd eta = X_ * fit.coefficients;
  eta += offset_;
  const Eigen::MatrixXd xc = X_ * fit.covariance;
  const Eigen::VectorXd quadratic = xc.cwiseProduct(X_).rowwise().sum();
  for (Eigen::Index i = 0; i < n; ++i) {
    if (weights_(i) <= 0) continue;
    const double mu = glm::link_inv(link, eta(i));
    if (!(mu > 1e-12)) continue;
    const double y = y_(i);
    // The Anscombe residual has the sign of y - mu: a record at or below its
    // mean cannot pass a non-negative threshold.
    if (threshold >= 0 && !(y > mu)) continue;
    const double variance = nb ? mu + mu * mu / fit.theta : mu;
    // Under the log link d mu / d eta is exp(eta) again: reuse it.
    const double d = link == glm::Link::log ? mu : glm::mu_eta(link, eta(i));
    // Leverage h = w x' (X'WX)^-1 x with Cov = phi (X'WX)^-1 for quasi-Poisson.
    const double working = weights_(i) * d * d / variance;
    const double h = std::clamp(working * quadratic(i) / phi, 0.0, 0.99);
    // Poisson Anscombe residual; its variance is about the dispersion index
    // (phi, or 1 + mu / theta for NB2). mu^(1/6) is the square root of the
    // square root of mu^(2/3).
    const double mu23 = std::cbrt(mu * mu);
    const double anscombe = 1.5 * (std::cbrt(y * y) - mu23) / std::sqrt(std::sqrt(mu23));
    const double index = nb ? 1 + mu / fit.theta : phi;
    const double s = anscombe / std::sqrt(index * (1 - h));
    if (s > threshold) {
      w(i) = weights_(i) / (s * s);
      any = true;
    }
  }
  if (!any) return {};
  // gamma: keep the total prior weight (Farrington et al. 1996).
  const double total = w.sum();
  if (!(total > 0)) return {};
  w *= weights_.sum() / total;
  return w;
}

glm::FitResult SeriesModel::fit_report() const {
  Eigen::MatrixXd X;
  Eigen::VectorXd y, offset, weights;
  build_design(X, y, offset, weights, records_.size());
  return glm::fit_glm(X, y, offset, weights, fit_options(), nullptr, true);
}

}  // namespace tallyd
