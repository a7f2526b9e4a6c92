// Known episodes: stretches of time when something really happened on a
// series (an invasion, a trap knocked down), from an events file the
// operator keeps. Tuning scores alerts against them.
//
// File format (CSV, UTF-8): a header row `series,start,end`, then one
// episode per row; start and end are RFC 3339 date-times (core/time.h),
// end >= start, both inclusive. Blank lines and lines starting with '#' are
// skipped. Fields are not quoted: a series id with a comma cannot be listed.
// A file with only the header is allowed (no episodes).
#pragma once

#include <string>
#include <string_view>
#include <vector>

#include "core/result.h"
#include "core/time.h"

namespace tallyd::tune {

struct Episode {
  std::string series;
  TimePoint start;  // inclusive
  TimePoint end;    // inclusive, >= start
};

// Parses the text of an events file; `source_name` names it in messages.
// Fails on the first bad row with "events.csv:4: ..." (file, line, reason);
// a file is all or nothing, so no partial list is returned.
Result<std::vector<Episode>> parse_episodes(std::string_view text, std::string_view source_name);

// Reads and parses a file; a missing or unreadable file is an error naming it.
Result<std::vector<Episode>> load_episodes(const std::string& path);

// True when `t` lies inside `e` (both ends inclusive).
inline bool inside(const Episode& e, TimePoint t) { return e.start <= t && t <= e.end; }

}  // namespace tallyd::tune
