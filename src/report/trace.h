// What a report shows of one replay: per series, every accepted record with
// its prediction (when judged) and verdict, and the fit at the end.
#pragma once

#include <cstdint>
#include <map>
#include <string>
#include <vector>

#include "core/observation.h"
#include "engine/engine.h"

namespace tallyd::report {

struct TracePoint {
  TimePoint time;
  std::int64_t count = 0;
  double exposure = 1;
  bool judged = false;  // false: warming up, no prediction
  double expected = 0;  // predictive mean (judged only)
  std::int64_t lower = 0;
  std::int64_t upper = 0;
  int flag = 0;  // +1 high alert, -1 low alert, 0 none
};

struct CoefficientRow {
  std::string name;
  double estimate = 0;
  double std_error = 0;  // NaN when aliased or not estimated
};

struct SeriesTrace {
  std::string id;
  std::vector<TracePoint> points;  // time order
  std::uint64_t alerts_high = 0;
  std::uint64_t alerts_low = 0;
  // The model at the end of the replay.
  std::string family;
  double alpha = 0;
  std::string fit_status;  // "ok", "not fitted", or the fit's status and note
  std::vector<CoefficientRow> coefficients;
  double dispersion = 1;
  double theta = 0;  // negbin size; +inf or 0 when not applicable

  bool exposure_varies() const;
};

// Collects traces from the replay observer (replay/replay.h on_record).
class TraceCollector {
 public:
  void add(const Observation& obs, const IngestResult& r);
  // Copies each series' final fit and settings from `engine`; call once at the end.
  std::vector<SeriesTrace> finish(const Engine& engine);

 private:
  std::map<std::string, SeriesTrace> traces_;
};

}  // namespace tallyd::report
