// Why a record was refused. Every refusal is counted by reason and logged with
// its source position; none stops the run.
#pragma once

#include <array>
#include <cstdint>
#include <string>
#include <string_view>

#include "core/observation.h"

namespace tallyd {

enum class RejectReason : std::uint8_t {
  bad_time,           // time missing or not RFC 3339 / epoch seconds
  bad_series,         // series id missing or empty
  bad_count,          // count missing, negative, non-integer or not a number
  bad_exposure,       // exposure not a number, negative, NaN or infinite
  zero_exposure,      // exposure exactly 0: no effort, nothing to judge or learn
  bad_covariate,      // a covariate value is not a finite number
  missing_covariate,  // the series' model needs a covariate the record lacks
  line_too_long,      // longer than the configured maximum line length
  bad_format,         // wrong number of columns, broken JSON, bad header
  out_of_order,       // older than (or as old as) the newest record of its series
  too_many_series,    // a new series id beyond the configured series limit
  read_error,         // the source failed to read (I/O error); what follows in it is lost
  missing_exposure,   // the exposure column is present but empty (JSON null): effort unknown, skipped
  too_late,           // with a late tolerance (engine/arrival_hold.h): older than its series' newest record
                      // by more than the tolerance, or not after a record of its series already judged
  duplicate_time,     // with a late tolerance: same series and time as a record already judged, or as one
                      // still held when arrival.duplicates = "refuse"
};

// Keep equal to the last enumerator above: counts are sized from it.
inline constexpr RejectReason kLastRejectReason = RejectReason::duplicate_time;
inline constexpr std::size_t kRejectReasonCount = static_cast<std::size_t>(kLastRejectReason) + 1;

// Stable snake_case label used in logs, JSON and metrics.
std::string_view reject_label(RejectReason reason);

struct Rejection {
  RejectReason reason;
  SourcePos where;
  std::string detail;  // one sentence, e.g. "count '-3' is negative"

  // "traps.csv:118: bad_count: count '-3' is negative"
  std::string describe() const;
};

// Counts of refusals by reason; plain value type.
struct RejectCounts {
  std::array<std::uint64_t, kRejectReasonCount> by_reason{};
  void add(RejectReason r) { ++by_reason[static_cast<std::size_t>(r)]; }
  std::uint64_t operator[](RejectReason r) const { return by_reason[static_cast<std::size_t>(r)]; }
  std::uint64_t total() const {
    std::uint64_t t = 0;
    for (auto n : by_reason) t += n;
    return t;
  }
};

}  // namespace tallyd
