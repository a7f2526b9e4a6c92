// An alert: a count that falls outside its predictive bounds.
#pragma once

#include <cstdint>
#include <optional>
#include <string>

#include "bounds/predictive.h"
#include "core/observation.h"
#include "series/model_spec.h"

namespace tallyd {

enum class AlertSide { high, low };
std::string_view to_string(AlertSide s);

// Where an alert stands in its episode (alert/episode_tracker.h).
enum class EpisodeStep {
  opened,     // the first alert of a new episode; JSON word "new"
  continued,  // a later alert of an episode already open; JSON word "ongoing"
};
std::string_view to_string(EpisodeStep s);

// The episode an alert belongs to: set by the episode tracker when the alert
// is written, absent before (e.g. while it waits in the Benjamini-Hochberg gate).
struct EpisodeTag {
  std::string id;  // "<series>/<direction>/<n>", n counting that series' episodes in that direction from 1
  EpisodeStep step = EpisodeStep::opened;
};

struct Alert {
  TimePoint time;
  std::string series;
  std::int64_t count = 0;
  double exposure = 1;
  double expected = 0;       // predictive mean
  std::int64_t lower = 0;    // integer predictive bounds at alpha
  std::int64_t upper = 0;
  double p_value = 1;        // predictive tail probability of a count at least as extreme, on `side`
  double alpha = 0;          // the threshold it was judged against
  AlertSide side = AlertSide::high;
  std::string detector = "bound";  // which detector fired: "bound" = one count outside its predictive bounds;
                                   // "shift" = CUSUM (detect/shift_cusum.h); "low_run" = run of low counts
  // The detector's statistic when it fired: bound - the tail probability (as
  // p_value); shift - the CUSUM value in nats that crossed its limit;
  // low_run - the number of records in the run; silence - the usual interval
  // in seconds; silence_end - seconds since the series' previous record.
  double statistic = 0;
  std::optional<EpisodeTag> episode;  // set by the episode tracker; written after every other key
  // Silence lines only (detect/silence.h; detector "silence" or "silence_end"):
  // the series' last record before the silence. Written after the episode keys.
  std::optional<TimePoint> last_seen;
};

// An alert for `obs` carrying its bounds, on `side` with tail probability
// `p_value` (also its statistic), judged at `alpha`; detector "bound". Pure.
Alert bound_alert(const Observation& obs, const bounds::Bounds& b, AlertSide side, double p_value, double alpha);

// The verdict on one count: an alert when the count lies beyond a bound on a
// side the spec watches (count > upper with p_high <= alpha, or count < lower
// with p_low <= alpha), else nullopt. Pure.
std::optional<Alert> judge_count(const Observation& obs, const bounds::Bounds& b, const AlertSpec& spec);

}  // namespace tallyd
