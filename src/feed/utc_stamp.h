// The one time layout most feeds write, "2025-06-01T06:00:00Z", read without
// the general RFC 3339 parser (core/time.h parse_time). Whatever this does not
// take is left to that parser, which then gives the verdict.
#pragma once

#include <string_view>

#include "core/time.h"

namespace tallyd {

// True when `text` is exactly YYYY-MM-DDTHH:MM:SSZ (20 bytes, upper-case T
// and Z, second 00-59, a real date of the proleptic Gregorian calendar,
// years 0000-9999); then stores the same time parse_time would give.
// False, with `time` untouched, for anything else, good or bad: other
// spellings (t, z, a space, fractions, offsets, second 60, epoch seconds)
// and errors alike. Does not allocate.
bool read_utc_stamp(std::string_view text, TimePoint& time);

}  // namespace tallyd
