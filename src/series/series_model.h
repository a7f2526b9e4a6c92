// The online model of one series: its training history, its current fit, and
// the predictive bounds for the next record.
//
// Streaming contract (the same for replay and the service): a new record is
// first judged against the fit made from the series' earlier records
// (`predict`), then joins the history (`learn`), which trims the window and
// refits on the configured cadence. A fit that fails keeps the previous
// coefficients; the reason is kept in `last_fit_note()`.
// Not thread-safe; owned by one engine.
#pragma once

#include <array>
#include <cstdint>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include <Eigen/Dense>

#include "bounds/predictive.h"
#include "core/observation.h"
#include "glm/fit.h"
#include "series/design.h"
#include "series/model_fit.h"
#include "series/model_spec.h"
#include "series/ring.h"
#include "series/window_step.h"

namespace tallyd {
namespace glm {
class SmallFit;
}

class BulkMemory;
class StateWriter;
class StateReader;

// Why a full refit ran: the refit cadence's causes (model.refit_every,
// cadence_from, step_between_refits) and the engine's refit on doubt.
enum class RefitCause : std::uint8_t {
  asked,       // refit() called with no cause (tests, reports)
  first,       // the series had no fit yet (its first judged record, or a failed fit)
  warm_up,     // the window held fewer than model.cadence_from records
  cadence,     // model.refit_every records since the last refit
  no_sums,     // steps on but no step sums (after a restore or an unconverged fit)
  step_limit,  // a step could not stand (series/window_step.h: strayed after recentring, or dispersion grew)
  doubt,       // model.refit_on_doubt: the engine refitted before judging a record
};
inline constexpr std::size_t kRefitCauses = 7;

// What the model says about one record before seeing it.
struct Prediction {
  bounds::Predictor predictor;  // eta mean and variance, offset included
  bounds::CountNoise noise;
  bounds::Bounds bounds;        // evaluated at the record's count
};

class SeriesModel {
 public:
  // `settings` must outlive the model.
  SeriesModel(std::string id, const SeriesSettings& settings);

  const std::string& id() const { return id_; }
  const SeriesSettings& settings() const { return *settings_; }

  // The name of a covariate the model needs that `obs` lacks, or nullopt.
  std::optional<std::string> missing_covariate(const Observation& obs) const;

  // True once the series has enough history (min_history plus the guard
  // band, model.guard_records) and a usable fit to judge records.
  bool ready() const;

  // Predictive bounds for `obs` from the current fit. Precondition: ready()
  // and !missing_covariate(obs). Const: judging never changes the model.
  // With `allow_screen` and alert.screen on, a record that provably raises
  // no bound alert may come back with bounds.screened set (no integer
  // bounds; see bounds::Bounds); calling again without it gives the full
  // bounds of the same record (the draws are seeded per record). While
  // model.refit_on_doubt may act (records learned since the last refit), the
  // screen keeps a settled record's floors above model.doubt_factor * alpha
  // whenever its exact tails would (bounds::Options::wanted_floor).
  Prediction predict(const Observation& obs, bool allow_screen = false) const;

  // Adds `obs` to the training history, trims the window, refits if due.
  // Precondition: obs.time is later than every record learned so far.
  void learn(const Observation& obs, double weight = 1.0);

  // Refits now on the whole current window, whatever the cadence; `cause`
  // is only counted (fits_for).
  void refit(RefitCause cause = RefitCause::asked);

  // A fresh fit of the current window from a cold start, with the null
  // deviance, for reports; does not change the model.
  glm::FitResult fit_report() const;

  std::optional<TimePoint> last_time() const;
  // Time of the oldest record still in the window. Precondition: history_size() > 0.
  TimePoint first_time_in_window() const { return time_at(0); }
  std::size_t history_size() const { return records_.size(); }
  std::size_t min_history() const;  // effective: max(spec min_history, #coefficients + 2)
  // The fit it judges with: glm::FitResult's figures, its arrays through
  // maps (series/model_fit.h); fit().result() is a glm::FitResult copy.
  const ModelFit& fit() const { return fit_; }
  bool has_fit() const { return has_fit_; }
  const std::string& last_fit_note() const { return last_fit_note_; }
  glm::FitStatus last_fit_status() const { return last_fit_status_; }
  std::uint64_t fits_done() const { return fits_done_; }
  // GLM fits (as fits_done counts them) of refits for `cause`, since
  // construction or restore (not saved).
  std::uint64_t fits_for(RefitCause cause) const { return fits_by_cause_[static_cast<std::size_t>(cause)]; }
  // Times the step's sums were taken again at its own coefficients
  // (step_forward, series/window_step.h) since construction or restore.
  std::uint64_t steps_recentred() const { return steps_recentred_; }
  // Records learned since the last refit (0 right after one).
  std::size_t records_since_refit() const { return since_refit_; }

  // Every field that decides future predictions (history, covariates, fit
  // with its warm-start values, counters), in the layout of core/state_codec.h.
  // Implemented in series/series_state.cc.
  void save_state(StateWriter& w) const;
  // Replaces this model's state with one saved by save_state for the same
  // settings. On failure the reader carries the error and this model must be
  // discarded (it may be partly overwritten). A coefficient count that does
  // not match the settings is a failure. When the reader offers memory
  // (StateReader::memory), the history is placed in it and the model keeps
  // a share of it.
  void load_state(StateReader& r);

 private:
  // A record of the window in 8 bytes: its time as seconds after origin_
  // and its count, each when it fits in 32 bits (see wide_); its exposure
  // and prior weight are in scales_.
  struct Stored {
    std::uint32_t since_origin;
    std::uint32_t count;
  };
  // A record's time and count in full, for a window with one that does not fit Stored.
  struct Wide {
    TimePoint time;
    std::int64_t count;
  };

  void trim_window(TimePoint latest);
  // Drops the `rows` oldest records with their covariates and seasonal columns.
  void drop_oldest(std::size_t rows);
  // The design of the oldest `rows` records of the window.
  void build_design(Eigen::MatrixXd& X, Eigen::VectorXd& y, Eigen::VectorXd& offset,
                    Eigen::VectorXd& weights, std::size_t rows) const;
  glm::FitOptions fit_options() const;
  // model.step_between_refits (series/window_step.h). What the last full
  // refit's resistant correction did, so that each step publishes a fit
  // corrected the same way.
  struct Correction {
    double dispersion_divisor = 1;  // quasi-Poisson phi and covariance divided by this
    double mean_shift = 0;          // log of the mean factor taken from the intercept
  };
  bool steps_on() const;
  // After a full refit of the current design (X_, y_, offset_): the sums at
  // its coefficients over the records it used, with the weights it used;
  // `small` is the refit's fast path, whose means are used when it ended at
  // the steps' beta*.
  void start_steps(const Eigen::VectorXd& fit_weights, const Correction& correction, double gamma,
                   const glm::SmallFit& small);
  // The design row (into steps_->x) and offset of the window's record i.
  double stored_row(std::size_t i);
  // The prior weight a record enters the step sums with: the resistant
  // down-weighting against the current fit, as resistant_weights gives it.
  double step_weight(double offset, double y, double prior);
  // Starts the step's sums again at the last step's coefficients, each
  // record of the sums entering with the weight it entered with before.
  void recentre_steps();
  // Adds the records that entered the fit since, then publishes the step.
  void step_forward();
  // Prior weights for the resistant refit after `fit` of the current design
  // (X_, y_, offset_, weights_): records with standardized Anscombe residual
  // above model.reweight_threshold get weight / residual^2, all rescaled to
  // the same total. Empty when no record is down-weighted.
  // Divides a resistant quasi-Poisson fit's phi (and covariance) by the
  // expected shrinkage of the weighted Pearson statistic, and with
  // model.reweight_mean_correction (log link) its mean by the expected
  // shrinkage of the weighted mean (series/resistant_dispersion.h). Reads the
  // design of the current refit, and the linear predictors and means at
  // result's coefficients from `small` when it holds them (estimate_at).
  Correction correct_resistant_fit(glm::FitResult& result, const glm::SmallFit& small) const;
  // One record's standardized Anscombe residual against `fit` when it
  // exceeds model.reweight_threshold (the record is then down-weighted by
  // its square), else 0. `d` is d mu / d eta at the record, `quadratic` its
  // x' Cov x. Shared by resistant_weights and the steps' step_weight.
  double outlying_residual(const glm::FitFigures& fit, double y, double mu, double d, double prior,
                           double quadratic) const;
  // `gamma`, when not null, receives the factor all weights were scaled by.
  // The linear predictors and means at fit's coefficients are read from
  // `small` when it holds them (the same values bit for bit).
  Eigen::VectorXd resistant_weights(const glm::FitResult& fit, const glm::SmallFit& small,
                                    double* gamma = nullptr) const;
  double row_for(TimePoint time, double exposure, const double* covariates,
                 RowRef row) const;

  std::string id_;
  const SeriesSettings* settings_;
  int p_;  // number of coefficients

  std::optional<TimePoint> origin_;   // first accepted record: trend zero
  // The mapping a restore placed the rings' blocks in, if any (kept alive
  // while they are in use; series_state.cc).
  std::shared_ptr<BulkMemory> bulk_;
  // The window, oldest first, each in one block (series/ring.h) sized up to
  // the window's record limit: a series holds two or three allocations of
  // history instead of a deque's dozen blocks, and a restore fills them with
  // one reservation each.
  Ring<Stored> records_;
  // Time and count of records_ in full, one row each, or no rows while every
  // record of the window fits Stored (seconds after origin_ and count below
  // 2^32: all but a window spanning 136 years or a count of 4 billion).
  // Started, stays and goes like scales_ (below).
  Ring<Wide> wide_;
  TimePoint time_at(std::size_t i) const {
    return wide_.empty() ? *origin_ + Seconds{records_.row(i)->since_origin} : wide_.row(i)->time;
  }
  std::int64_t count_at(std::size_t i) const {
    return wide_.empty() ? static_cast<std::int64_t>(records_.row(i)->count) : wide_.row(i)->count;
  }
  // Appends a record to records_ (and wide_ when needed; series_state.cc).
  void push_record(TimePoint time, std::int64_t count);
  bool fits_stored(TimePoint time, std::int64_t count) const;
  std::uint64_t since_origin(TimePoint time) const;
  Ring<double> covariate_values_;  // covariates of records_, one row each (spec order)
  // Exposure and prior weight of records_, one row {exposure, weight} each,
  // or no rows at all while every record of the window has both exactly 1
  // (bit for bit): most series never see another value, and their history
  // then takes 8 bytes a record (Stored) instead of 32. The first record with
  // another value starts the rows, {1, 1} for every record before it; the
  // rows stay (as many as records_) until the window is empty.
  Ring<double> scales_;
  double exposure_at(std::size_t i) const { return scales_.empty() ? 1.0 : scales_.row(i)[0]; }
  double weight_at(std::size_t i) const { return scales_.empty() ? 1.0 : scales_.row(i)[1]; }
  // Appends the scales of the record just pushed on records_ (series_state.cc).
  void push_scales(double exposure, double weight);
  // The seasonal design columns of records_ (season_columns), one row each,
  // so that a refit copies them instead of computing sin/cos for the whole
  // window. Derived from the times, not saved: a restored model (or one that
  // has none yet) fills it at its next learn().
  Ring<double> season_values_;
  int seasons_per_row_ = 0;  // season_column_count(spec)
  bool season_cache_ok() const;
  void fill_season_cache();
  void push_season_values(TimePoint time);
  std::size_t since_refit_ = 0;
  // The newest record's time (when records_ is not empty), kept beside the
  // rest of the model: last_time() is asked for every record, and reading
  // the ring's far end was a cache miss per record.
  TimePoint newest_{};

  // Its arrays in one block; a restore places it in its mapping.
  ModelFit fit_;
  bool has_fit_ = false;
  glm::FitStatus last_fit_status_ = glm::FitStatus::failed;
  std::string last_fit_note_ = "not fitted yet";
  std::uint64_t fits_done_ = 0;
  std::uint64_t steps_recentred_ = 0;
  std::array<std::uint32_t, kRefitCauses> fits_by_cause_{};

  // alert.alpha's normal quantile, computed once (bounds::AlphaQuantile):
  // settings_ outlives the model and never changes under it.
  bounds::AlphaQuantile quantile_;

  // model.step_between_refits: the sums and the weight each of the
  // window's oldest fit_weights.size() records entered them with, and the
  // steps' scratch. Behind a pointer, made by the first start_steps: a
  // model with steps off never has them, and a restored one has none until
  // its first refit (~250 bytes a series less to build in a restore,
  // docs/benchmarks.md "Restart, ninth pass").
  struct Steps {
    explicit Steps(std::size_t max_rows) : fit_weights(1, max_rows) {}
    WindowStep sums;
    Ring<double> fit_weights;
    Correction correction;
    double gamma = 1;
    double phi_start = 1;  // Pearson's statistic / (n - p) when the sums started
    Eigen::RowVectorXd x;
    // Per-record scratch (sized by start_steps, so a record allocates
    // nothing): Cov * x for step_weight, the stepped coefficients.
    Eigen::VectorXd cx;
    Eigen::VectorXd beta;
  };
  std::unique_ptr<Steps> steps_;
  // True while the step sums are active (steps_ made and not cleared).
  bool stepping() const { return steps_ && steps_->sums.active(); }

  // Frees the refit scratch below.
  void release_workspace();

  // Refit scratch: built, used and freed within refit(), so a series between
  // refits holds only its history and its fit.
  Eigen::MatrixXd X_;
  Eigen::VectorXd y_, offset_, weights_;
};

}  // namespace tallyd
