// One timestamped count from a feed: the unit that flows from a parser to the engine.
#pragma once

#include <chrono>
#include <cstdint>
#include <string>
#include <vector>

namespace tallyd {

// A numeric feed column other than time/series/count/exposure, usable by name
// as a model covariate (e.g. "temperature_c").
struct Covariate {
  std::string name;
  double value = 0.0;
};

// Where a record came from, for messages: "traps.csv:118" or "tcp 127.0.0.1:5312".
struct SourcePos {
  std::string source;     // file path or peer description
  std::uint64_t line = 0;  // 1-based line number within the source; 0 when not applicable
};

struct Observation {
  std::chrono::sys_seconds time;  // when the count was taken (UTC)
  std::string series;             // series id, e.g. a trap or sensor name
  std::int64_t count = 0;         // events counted, >= 0
  double exposure = 1.0;          // effort: trap-nights, sensor-hours...; > 0; offset is log(exposure)
  std::vector<Covariate> covariates;
  SourcePos where;

  // Value of the named covariate, or nullptr when the record does not carry it.
  const double* covariate(std::string_view name) const {
    for (const Covariate& c : covariates)
      if (c.name == name) return &c.value;
    return nullptr;
  }
};

}  // namespace tallyd
