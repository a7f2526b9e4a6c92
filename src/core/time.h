// Time stamps and durations as they appear in feeds and configs.
#pragma once

#include <chrono>
#include <optional>
#include <string>
#include <string_view>

#include "core/result.h"

namespace tallyd {

using Seconds = std::chrono::seconds;
using TimePoint = std::chrono::sys_seconds;

inline constexpr double kSecondsPerDay = 86400.0;
inline constexpr double kDaysPerYear = 365.25;  // a model year, as used for trend and seasons

// Parses an RFC 3339 date-time ("2025-06-01T06:00:00Z", "2025-06-01T08:00:00+02:00",
// fractional seconds are truncated) or integer epoch seconds ("1748757600").
// Second 60 (a leap second) is accepted only at 23:59 UTC and read as second 59.
// A lowercase 't'/'z' or a space between date and time is accepted (RFC 3339 §5.6 NOTE).
// Fails with a message quoting the text when it is neither.
Result<TimePoint> parse_time(std::string_view text);

// "2025-06-01T06:00:00Z": always UTC, whole seconds.
std::string format_time(TimePoint t);

// Parses a duration: a number followed by a unit, s, m (minutes), h, d, w, y
// (365.25 days). Several parts may be joined: "1d12h". Rounds to whole seconds.
// Fails on anything else, on a total of 0, and beyond 1e15 seconds.
Result<Seconds> parse_duration(std::string_view text);

// "7d", "1y", "90m": the shortest exact spelling.
std::string format_duration(Seconds d);

// Years (365.25 days) from `origin` to `t`; negative if t is earlier.
inline double years_between(TimePoint origin, TimePoint t) {
  return static_cast<double>((t - origin).count()) / (kSecondsPerDay * kDaysPerYear);
}

}  // namespace tallyd
