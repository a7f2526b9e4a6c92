// The alert file format: JSON Lines, one object per alert, keys in a fixed
// order and numbers in a fixed notation so that two replays of the same feed
// give byte-identical files:
//   {"time":"2025-08-14T06:00:00Z","series":"orchard-n03","count":57,
//    "expected":12.41,"lower":3,"upper":31,"p_value":2.113e-05,
//    "direction":"high","exposure":7,"alpha":0.001,"detector":"bound",
//    "statistic":2.113e-05,"episode":"orchard-n03/high/2","episode_state":"new"}
// (one line per alert; wrapped here for reading). The episode keys come last
// and only when the alert went through the episode tracker (always, for
// what replay and serve write). "episode_state" is "new" for an episode's
// first alert and "ongoing" for the later ones.
//
// An episode's end is a line of its own, told apart by its first key:
//   {"episode_closed":"orchard-n03/high/2","series":"orchard-n03",
//    "direction":"high","opened":"2025-08-14T06:00:00Z",
//    "last_alert":"2025-08-21T06:00:00Z","closed":"2025-09-11T06:00:00Z",
//    "alerts":2,"quiet_records":3}
// opened / last_alert: times of its first and last alert; closed: time of the
// judged record that completed the run of quiet_records records without an
// alert in its direction. Such a line is not an alert: count alerts as the
// lines without an "episode_closed" key.
#pragma once

#include <string>

#include "alert/alert.h"
#include "alert/episode_tracker.h"

namespace tallyd {

// One JSON object, without the trailing newline.
std::string alert_json(const Alert& a);

// A one-line summary for people: "2025-08-14T06:00:00Z orchard-n03 HIGH count 57 > upper 31 (expected 12.4, p=2.1e-05)".
// With an episode: " [episode orchard-n03/high/2 new]" appended.
std::string alert_text(const Alert& a);

// The closing line of an episode, without the trailing newline.
std::string episode_end_json(const EpisodeEnd& e);

// "2025-09-11T06:00:00Z orchard-n03 HIGH episode orchard-n03/high/2 closed:
//  2 alerts from 2025-08-14T06:00:00Z to 2025-08-21T06:00:00Z, then 3 records with no high alert" (one line).
std::string episode_end_text(const EpisodeEnd& e);

}  // namespace tallyd
