#include "series/series_model.h"

#include <algorithm>
#include <cmath>
#include <limits>

#include "series/design.h"
#include "series/refit_work.h"

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
      covariate_values_(settings.model.covariates.size(), window_rows(settings.model)),
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
  return records_.row(records_.size() - 1)->time;
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
  for (std::size_t i = 0; i < records_.size(); ++i) push_season_values(records_.row(i)->time);
}

void SeriesModel::learn(const Observation& obs, double weight) {
  if (!origin_) origin_ = obs.time;
  if (!season_cache_ok()) fill_season_cache();  // restored from a checkpoint
  // Room first, so that a window of R records never needs a block of R + 1
  // rows: dropping the oldest before the push leaves the same window as
  // dropping it after (trim_window drops a prefix either way).
  const std::optional<std::size_t> limit = settings_->model.window.records;
  if (limit && *limit > 0 && records_.size() >= *limit) drop_oldest(records_.size() - *limit + 1);
  *records_.push_back() = Stored{obs.time, obs.count, obs.exposure, weight};
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
    while (drop < records_.size() && records_.row(drop)->time <= latest - *w.span) ++drop;
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
    const Stored& r = *records_.row(i);
    const double* cov = covariate_values_.row(i);
    const auto row = static_cast<Eigen::Index>(i);
    if (!cached) {
      offset(row) = row_for(r.time, r.exposure, cov, X.row(row));
    } else {
      // The same row as row_for, with the seasonal columns kept since learn().
      const DesignInput in{r.time, origin_.value_or(r.time), r.exposure, cov};
      offset(row) = design_row(settings_->model, in, season_values_.row(i), X.row(row));
    }
    y(row) = static_cast<double>(r.count);
    weights(row) = r.weight;
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
  // Built, used and freed here, so a series between refits holds only its
  // history and its fit (an n x p design would be most of its memory).
  RefitWork work;
  build_design(work.X, work.y, work.offset, work.weights, records_.size() - guard);
  work.ready();

  glm::FitOptions options = fit_options();
  options.null_deviance = false;  // not needed for judging; fit_report() asks for it
  if (has_fit_ && std::isfinite(fit_.theta)) options.start_theta = fit_.theta;
  const Eigen::VectorXd* start = has_fit_ ? &fit_.coefficients : nullptr;

  glm::FitResult result = fit_window(work, work.weights, options, start);
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
      Eigen::VectorXd resistant = resistant_weights(settings_->model, work, result);
      if (resistant.size() == 0) break;
      glm::FitResult next = fit_window(work, resistant, options, &result.coefficients);
      ++fits_done_;
      if (next.status != glm::FitStatus::ok) break;
      result = std::move(next);
      correct_resistant_fit(settings_->model, work, result);
      corrected = true;
    }
    if (!corrected) correct_resistant_fit(settings_->model, work, result);
  }
  if (result.status == glm::FitStatus::ok ||
      (result.status == glm::FitStatus::not_converged && !has_fit_)) {
    fit_ = std::move(result);
    has_fit_ = true;
  }
}

glm::FitResult SeriesModel::fit_report() const {
  Eigen::MatrixXd X;
  Eigen::VectorXd y, offset, weights;
  build_design(X, y, offset, weights, records_.size());
  return glm::fit_glm(X, y, offset, weights, fit_options(), nullptr, true);
}

}  // namespace tallyd
