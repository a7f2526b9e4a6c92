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

#include "alert/alert.h"
#include "core/observation.h"
#include "core/reject.h"
#include "series/model_spec.h"
#include "series/series_model.h"

namespace tallyd {

class StateWriter;
class StateReader;

struct EngineLimits {
  std::size_t max_series = 100000;  // new series ids beyond this are rejected (too_many_series)
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
  std::optional<Rejection> rejection;    // when rejected
};

struct EngineCounters {
  std::uint64_t records = 0;     // offered to ingest
  std::uint64_t judged = 0;
  std::uint64_t warming_up = 0;
  std::uint64_t alerts_high = 0;
  std::uint64_t alerts_low = 0;
  RejectCounts rejected;
};

class Engine {
 public:
  // `settings` must outlive the engine.
  explicit Engine(const SettingsTable& settings, EngineLimits limits = {});

  IngestResult ingest(const Observation& obs);

  // Counts a refusal made before the engine (by a parser) so one place holds all counts.
  void count_rejection(RejectReason reason) { counters_.rejected.add(reason); }

  const EngineCounters& counters() const { return counters_; }
  std::size_t series_count() const { return series_.size(); }
  const SeriesModel* find(const std::string& series) const;
  // Series in id order.
  const std::map<std::string, std::unique_ptr<SeriesModel>>& series() const { return series_; }

  // Counters and every series model (engine/engine_state.cc; layout of
  // core/state_codec.h). load_state is for a freshly constructed engine with
  // the same settings; on failure the reader carries the error and the engine
  // must be discarded. Series saved beyond limits.max_series are kept.
  void save_state(StateWriter& w) const;
  void load_state(StateReader& r);

 private:
  IngestResult reject(const Observation& obs, RejectReason reason, std::string detail);

  const SettingsTable* settings_;
  EngineLimits limits_;
  std::map<std::string, std::unique_ptr<SeriesModel>> series_;
  EngineCounters counters_;
};

}  // namespace tallyd
