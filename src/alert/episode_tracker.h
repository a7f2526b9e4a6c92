// Episodes: alerts of one series in one direction grouped into stretches.
//
// An alert of any detector (bound, bound_fdr, shift, low_run, and any later
// one) opens an episode for its series and direction (AlertSide) when none is
// open, and continues the open one otherwise. An open episode closes once
// its series has had `close_after` judged records in a row without an alert
// in that direction; the record that completes the run closes it.
//
// Episode ids are "<series>/<direction>/<n>": n counts the episodes of that
// series and direction from 1 and is kept (and checkpointed) after they
// close, so an id is never given twice while the state lives on. They depend
// only on the order of alerts and judged records, never on a clock, so two
// replays of the same feed give the same ids.
//
// Pure and single-threaded; the engine owns one (engine/engine.h).
#pragma once

#include <cstdint>
#include <map>
#include <string>
#include <utility>
#include <vector>

#include "alert/alert.h"
#include "core/time.h"

namespace tallyd {

class StateWriter;
class StateReader;

// A closed episode: what the alert log's closing line says.
struct EpisodeEnd {
  std::string id;
  std::string series;
  AlertSide side = AlertSide::high;
  TimePoint opened;          // time of its first alert (the alerted record's time)
  TimePoint last_alert;      // time of its last alert
  TimePoint closed;          // time of the judged record that completed the run of quiet records
  std::uint64_t alerts = 0;  // alerts in it
  std::uint32_t quiet_records = 0;  // the run that closed it (the close_after in force then)
};

struct EpisodeTotals {
  std::uint64_t opened = 0;
  std::uint64_t closed = 0;
};

class EpisodeTracker {
 public:
  // Stamps `a` with its episode (a.episode): opens one for (a.series, a.side)
  // when none is open, else continues it and resets its run of quiet records.
  void on_alert(Alert& a);

  // A judged record of `series` at `time` that raised alerts on the sides in
  // `alerted` (already passed to on_alert). Every open episode of the series
  // in another direction counts one more quiet record; those reaching
  // `close_after` (>= 1) are closed and appended to `closed`, high before low.
  void on_judged(const std::string& series, TimePoint time, const std::vector<AlertSide>& alerted,
                 std::uint32_t close_after, std::vector<EpisodeEnd>& closed);

  std::size_t open_count() const { return open_; }
  const EpisodeTotals& totals() const { return totals_; }
  // The open episode's id for (series, side), or "" when none is open.
  std::string open_id(const std::string& series, AlertSide side) const;

  // Saved state (core/state_codec.h layout): totals, then one line per
  // (series, direction) that ever had an episode. load_state replaces this
  // tracker's state; on a bad token the reader carries the error.
  void save_state(StateWriter& w) const;
  void load_state(StateReader& r);

 private:
  struct Slot {
    std::uint64_t episodes = 0;  // episodes ever opened here: the n of the latest id
    bool open = false;
    TimePoint opened;
    TimePoint last_alert;
    std::uint64_t alerts = 0;
    std::uint32_t quiet = 0;     // judged records in a row without an alert here, since the last one
  };
  static std::string make_id(const std::string& series, AlertSide side, std::uint64_t n);

  std::map<std::pair<std::string, AlertSide>, Slot> slots_;
  std::size_t open_ = 0;
  EpisodeTotals totals_;
};

}  // namespace tallyd
