// The alert file format: JSON Lines, one object per alert, keys in a fixed
// order and numbers in a fixed notation so that two replays of the same feed
// give byte-identical files:
//   {"time":"2025-08-14T06:00:00Z","series":"orchard-n03","count":57,
//    "expected":12.41,"lower":3,"upper":31,"p_value":2.113e-05,
//    "direction":"high","exposure":7,"alpha":0.001,"detector":"bound",
//    "statistic":2.113e-05}
// (one line per alert; wrapped here for reading).
#pragma once

#include <string>

#include "alert/alert.h"

namespace tallyd {

// One JSON object, without the trailing newline.
std::string alert_json(const Alert& a);

// A one-line summary for people: "2025-08-14T06:00:00Z orchard-n03 HIGH count 57 > upper 31 (expected 12.4, p=2.1e-05)".
std::string alert_text(const Alert& a);

}  // namespace tallyd
