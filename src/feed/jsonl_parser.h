// JsonlParser: turns lines of a JSON Lines feed into observations.
//
// Each line is one JSON object:
//   {"time": "2025-06-01T06:00:00Z", "series": "trap-4", "count": 17, "exposure": 2, "temp_c": 14.5}
// Members (keys are case-sensitive):
//   time      a string (RFC 3339 or epoch digits) or a number of epoch seconds
//             with a whole value (1748757600 or 1748757600.0); required
//   series    a string, or an integer written without fraction (used as its
//             digits); required
//   count     a number with a whole value >= 0 (3 and 3.0; not 3.5 or "3"); required
//   exposure  a number > 0; optional: absent or null = 1
//   any other member holding a number is a covariate of that name; members
//   holding anything else (strings, null, true/false, arrays, objects) are
//   ignored.
// Field rules and the refusals they give are those of feed/field_check.h.
// Lines that are blank or start with '#' are skipped.
#pragma once

#include <string_view>

#include "core/observation.h"
#include "feed/json_object.h"
#include "feed/parse_outcome.h"

namespace tallyd {

class JsonlParser {
 public:
  // One line (without its line end) found at `where`: a record, a rejection,
  // or skip. A line that is not one well-formed JSON object is bad_format,
  // whatever its members hold. Otherwise the refusal is for the first problem
  // in line order, a bad value or a member named twice (bad_format), then for
  // the first missing member in the order time, series, count.
  // Never throws on data.
  // Not thread-safe: reuses internal buffers between calls.
  ParseOutcome parse(std::string_view line, const SourcePos& where);

 private:
  JsonObjectReader reader_;
};

}  // namespace tallyd
