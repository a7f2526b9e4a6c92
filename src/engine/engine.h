// The engine: routes each record to its series, judges it against the model
// as it was before this count, then lets the model learn it.
//
// No IO, no threads, no clock: replay and the service feed it the same
// records in the same order and get the same alerts. Not thread-safe.
#pragma once

#include <cstdint>
#include <map>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "alert/alert.h"
#include "alert/episode_tracker.h"
#include "core/bulk_allocator.h"
#include "core/observation.h"
#include "core/reject.h"
#include "detect/detectors.h"
#include "detect/fdr.h"
#include "detect/shift_cusum.h"
#include "detect/silence.h"
#include "engine/arrival_hold.h"
#include "series/model_spec.h"
#include "series/model_handle.h"
#include "series/series_model.h"

namespace tallyd {

class StateWriter;
class StateReader;

// model.refit_on_doubt: a record judged by a fit older than its newest
// records is judged again after a refit unless both its p-values exceed
// model.doubt_factor times alpha (or the screen's lower bounds on them do).

struct EngineLimits {
  std::size_t max_series = 100000;  // new series ids beyond this are rejected (too_many_series)
  ArrivalSpec arrival;              // late and duplicate records, before ingest (engine/arrival_hold.h; [arrival])
};

struct IngestResult {
  enum class Kind {
    judged,      // compared with its bounds, then learned
    warming_up,  // learned only: the series has too little history to judge yet
    rejected,    // refused: see `rejection`; nothing was learned
  };
  Kind kind = Kind::rejected;
  std::optional<Prediction> prediction;  // when judged
  std::optional<Alert> alert;            // when judged and outside the bounds
  std::vector<Alert> detector_alerts;    // when judged: alerts of the shift and low-run detectors, in that order
  // With control across series (FdrSpec::enabled) `alert` stays empty: the
  // bound's decisions are made per time step, when the step closes, and come
  // back here from the first record of a later step (any series). See flush().
  std::vector<Alert> released;
  std::optional<Rejection> rejection;    // when rejected
  // When accepted and its series had been reported silent: the recovery line
  // (detect/silence.h), to be written before the alerts above.
  std::optional<Alert> recovery;
  // Episodes this record closed (when judged): it completed a run of
  // alert.episode_close_records quiet records in their direction. Every alert
  // above carries its episode (Alert::episode); see alert/episode_tracker.h.
  std::vector<EpisodeEnd> closed;
};

// One record released by the arrival hold and what ingest made of it.
struct Released {
  std::vector<Alert> silence;  // silence alerts raised as the clock reached record.time; written first
  Observation record;
  IngestResult result;
};

// What offering one record (or moving the clock) set in motion, in the order
// to write it out: each released record's silence alerts, then its own
// lines; then `silence`.
struct OfferResult {
  std::optional<Rejection> refused;  // the arrival hold refused the offered record (counted)
  std::vector<Released> released;
  std::vector<Alert> silence;        // raised as the clock moved past the last released record
};

struct EngineCounters {
  std::uint64_t records = 0;     // offered to ingest
  std::uint64_t judged = 0;
  std::uint64_t warming_up = 0;
  std::uint64_t alerts_high = 0;
  std::uint64_t alerts_low = 0;          // alerts_high and alerts_low count every detector's alerts
  std::uint64_t alerts_shift = 0;        // of which from the shift CUSUM
  std::uint64_t alerts_low_run = 0;      // of which from the low-count run detector
  std::uint64_t alerts_fdr = 0;          // of which bound alerts decided across series (Benjamini-Hochberg)
  std::uint64_t alerts_silence = 0;      // of which silence alerts (counted as low)
  std::uint64_t silence_ends = 0;        // recovery lines (not alerts)
  std::uint64_t duplicates_replaced = 0; // held records replaced by a later duplicate (arrival.duplicates = "replace")
  RejectCounts rejected;
};

class Engine {
 public:
  // `settings` must outlive the engine.
  explicit Engine(const SettingsTable& settings, EngineLimits limits = {}, detect::FdrSpec fdr = {});

  IngestResult ingest(const Observation& obs);

  // The data path of replay and serve (engine/engine_offer.cc): `obs` goes
  // through the arrival hold, and every record it releases is judged by
  // ingest() in release order, the clock first moved to the record's time so
  // that silence alerts come out in time order. With no late tolerance and no
  // silence this is exactly {ingest(obs)}. Counts the record as offered
  // (counters().records) only when the hold refuses it or when ingest sees it.
  OfferResult offer(const Observation& obs);
  // Moves the data clock to `now` without a record (the service's optional
  // wall clock): releases held records and raises silence alerts it passed.
  OfferResult tick(TimePoint now);
  // Releases every held record (end of a replay). Call before flush().
  OfferResult drain();
  // Moves the silence clock only (never backwards); returns silence alerts of
  // series newly silent, counted. offer() and tick() call it.
  std::vector<Alert> advance_clock(TimePoint now);
  std::size_t held_count() const { return hold_.held_count(); }
  const detect::SilenceWatch& silence() const { return silence_; }

  // Closes the open time step of the control across series and returns its
  // alerts (empty when that control is off). Replay calls it after the last
  // record; the service when daemon/step_release.h says the step is due
  // (not at shutdown: the open step is kept in the checkpoint).
  std::vector<Alert> flush();
  // Open episodes and totals (part of a checkpoint). Every alert the engine
  // returns has passed through this tracker, in the order it is returned; a
  // new way of returning alerts must call episodes_.on_alert on each as well.
  const EpisodeTracker& episodes() const { return episodes_; }
  // The state of the control across series (part of a checkpoint).
  const detect::FdrState& fdr_state() const { return fdr_state_; }

  // Every judged record's prediction then carries its full bounds and
  // p-values (for reports, traces and tuning), whatever alert.screen says.
  // Off by default: with alert.screen on, records that provably raise no
  // alert may come back with prediction->bounds.screened set.
  void keep_full_bounds(bool on) { full_bounds_ = on; }

  // Counts a refusal made before the engine (by a parser) so one place holds all counts.
  void count_rejection(RejectReason reason) { counters_.rejected.add(reason); }

  const EngineCounters& counters() const { return counters_; }
  std::size_t series_count() const { return series_.size(); }
  const SeriesModel* find(const std::string& series) const;
  // The detector state of a series (nullptr when the series is unknown).
  // Part of the state a checkpoint must keep.
  const detect::DetectorState* detector_state(const std::string& series) const;
  // The series' models and detector states by id. After a restore their
  // nodes are in the restore's mapping (core/bulk_allocator.h); otherwise
  // the heap's.
  using SeriesMap = std::map<std::string, ModelHandle, std::less<std::string>,
                             BulkAllocator<std::pair<const std::string, ModelHandle>>>;
  using DetectorMap = std::map<std::string, detect::DetectorState, std::less<std::string>,
                               BulkAllocator<std::pair<const std::string, detect::DetectorState>>>;
  // Series in id order.
  const SeriesMap& series() const { return series_; }

  // Counters and every series model (engine/engine_state.cc; layout of
  // core/state_codec.h). load_state is for a freshly constructed engine with
  // the same settings; on failure the reader carries the error and the engine
  // must be discarded. Series saved beyond limits.max_series are kept.
  void save_state(StateWriter& w) const;
  void load_state(StateReader& r);

 private:
  IngestResult reject(const Observation& obs, RejectReason reason, std::string detail);
  void count_released(const std::vector<Alert>& alerts);
  void judge_released(std::vector<Observation>& ready, OfferResult& out);
  // Passes r's alerts, in output order, and then the judged record itself
  // through the episode tracker.
  void track(IngestResult& r, const Observation& obs, std::uint32_t close_after);

  const SettingsTable* settings_;
  EngineLimits limits_;
  SeriesMap series_;  // heap models, or placed by a restore (series/model_handle.h)
  DetectorMap detectors_;  // per-series detector state, same keys as series_
  detect::FdrSpec fdr_;
  detect::FdrState fdr_state_;
  detect::LimitTable limits_table_;  // CUSUM limits cached by value (a speed-up, not state)
  EngineCounters counters_;
  bool full_bounds_ = false;
  ArrivalHold hold_;
  detect::SilenceWatch silence_;
  EpisodeTracker episodes_;
};

}  // namespace tallyd
