// Silence: a series that stops reporting for much longer than it usually
// takes between records.
//
// Per series (DetectSpec::silence on), the usual interval is the median of
// the last `silence_window` gaps between its records, learned from its own
// history; the median, not the mean, so one long outage or a burst of
// catch-up records does not move it much. Once the series has at least
// `silence_min_gaps` gaps it is armed: its deadline is
//   last record time + ceil(silence_multiple * usual interval).
// When the clock passes the deadline (strictly later), one silence alert is
// raised; the next record of the series returns one recovery line and the
// gap it ends is learned like any other.
//
// The clock is given, never read: advance(now) with the data clock keeps
// replay deterministic. Not thread-safe; pure.
#pragma once

#include <cstdint>
#include <deque>
#include <map>
#include <optional>
#include <set>
#include <string>
#include <utility>
#include <vector>

#include "alert/alert.h"
#include "core/observation.h"
#include "detect/detect_spec.h"

namespace tallyd {
class StateWriter;
class StateReader;
}  // namespace tallyd

namespace tallyd::detect {

// Detector names on alert lines (Alert::detector).
inline constexpr const char* kSilenceLabel = "silence";          // the series went quiet
inline constexpr const char* kSilenceEndLabel = "silence_end";   // its first record after a silence alert

// The median of `gaps` in seconds (the mean of the middle two for an even
// count), rounded to whole seconds; nullopt when empty.
std::optional<Seconds> median_gap(const std::deque<std::int64_t>& gaps_seconds);

class SilenceWatch {
 public:
  // A record of `obs.series` accepted at `obs.time` (after its series' newest,
  // as the engine guarantees) under `spec`. Returns the recovery line when the
  // series was silent:
  //   detector "silence_end", direction low, time/count/exposure of `obs`,
  //   statistic = seconds since the previous record, last_seen = that record's time;
  //   expected, lower, upper, alpha 0 and p_value 1 (no statement of probability).
  std::optional<Alert> report(const Observation& obs, const DetectSpec& spec);

  // Moves the clock to `now` (never backwards) and returns one silence alert
  // per armed series whose deadline is now passed, by deadline then id:
  //   detector "silence", direction low, time = the deadline, count 0,
  //   statistic = the usual interval in seconds, last_seen = its last record;
  //   expected, lower, upper, exposure, alpha 0 and p_value 1.
  std::vector<Alert> advance(TimePoint now);

  std::optional<TimePoint> clock() const { return clock_; }
  // The usual interval of `series`, or nullopt when unknown or not armed yet.
  std::optional<Seconds> usual_interval(const std::string& series) const;
  std::size_t silent_count() const;

  // Layout of core/state_codec.h; load_state is for a fresh object, and on
  // failure the reader carries the error.
  void save_state(StateWriter& w) const;
  void load_state(StateReader& r);

 private:
  struct Track {
    TimePoint last{};
    std::deque<std::int64_t> gaps;      // seconds, oldest first, at most silence_window
    std::optional<TimePoint> deadline;  // set while armed and not silent
    std::int64_t usual_seconds = 0;     // the interval the deadline was set from
    bool silent = false;
  };
  std::optional<TimePoint> clock_;
  std::map<std::string, Track> tracks_;
  std::set<std::pair<TimePoint, std::string>> deadlines_;  // armed, not silent: (deadline, series)
};

}  // namespace tallyd::detect
