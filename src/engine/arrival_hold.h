// The arrival hold: a stage in front of Engine::ingest that lets records of a
// series arrive a little late or twice and still be judged in time order.
//
// With a late tolerance T > 0 every accepted record is held back until the
// data clock (the newest record time seen across all series, or a time given
// by tick()) reaches its time + T; then it is released, and records are
// released in (time, series id) order. A late record within T therefore
// takes its place among its series' records before any of them after it is
// judged, and a duplicate (same series and time) of a held record either is
// refused or replaces the held one, before it is judged.
//
// Refused, with a Rejection naming the series and both times:
//   too_late        older than its series' newest record by more than T, or
//                   not after a record of its series already released
//   duplicate_time  the time of a record of its series already released, or
//                   of a held one under DuplicatePolicy::refuse
// Memory: at most spec.max_held records are held (see ArrivalSpec).
// With T = 0 (the default) nothing is held, nothing is checked here and
// every record passes straight through: the engine's own out_of_order rule
// applies, exactly as without this stage.
//
// Held records were accepted: they belong to the saved state (save/load).
// Pure: no clock, no IO. Not thread-safe.
#pragma once

#include <cstdint>
#include <cstddef>
#include <map>
#include <optional>
#include <set>
#include <string>
#include <utility>
#include <vector>

#include "core/observation.h"
#include "core/reject.h"
#include "core/time.h"

namespace tallyd {

class StateWriter;
class StateReader;

enum class DuplicatePolicy : std::uint8_t {
  refuse,   // a second record for a held (series, time) is refused as duplicate_time
  replace,  // a second record for a held (series, time) replaces the held one
};

// Options, from the config table [arrival] (docs/config.md).
struct ArrivalSpec {
  Seconds late_tolerance{0};  // T: how much older than its series' newest a record may be; 0 = hold nothing
  DuplicatePolicy duplicates = DuplicatePolicy::refuse;
  // Most records held at once over all series. Beyond it the oldest held
  // record is released early (judged now, nothing dropped), so a flood of
  // records cannot exhaust memory; a late record for its series may then be
  // refused as too_late.
  std::size_t max_held = 100000;
};

class ArrivalHold {
 public:
  // `max_series`: a record of a new series beyond this many is refused as
  // too_many_series (the engine's limit, applied here too because the hold
  // keeps a little state per series before the engine sees it).
  explicit ArrivalHold(ArrivalSpec spec = {}, std::size_t max_series = SIZE_MAX)
      : spec_(spec), max_series_(max_series) {}

  // True when records are held at all (late_tolerance > 0).
  bool active() const { return spec_.late_tolerance.count() > 0; }
  const ArrivalSpec& spec() const { return spec_; }

  enum class Verdict { held, replaced, refused, passed };
  // Takes `obs`. When inactive: `passed`, `obs` is appended to `ready` and
  // nothing else happens. When active: `held` or `replaced` (kept for later),
  // or `refused` with `rejection` filled; then every held record the data
  // clock has passed is appended to `ready`, oldest first.
  Verdict offer(const Observation& obs, std::vector<Observation>& ready, std::optional<Rejection>& rejection);

  // Moves the data clock to `now` (never backwards) and appends the records it
  // passed to `ready`, oldest first.
  void tick(TimePoint now, std::vector<Observation>& ready);

  // Appends every held record to `ready`, oldest first (end of a replay).
  void drain(std::vector<Observation>& ready);

  // The data clock minus T: every record up to this time has been released.
  // nullopt before the first record (and always when inactive).
  std::optional<TimePoint> released_through() const;
  std::size_t held_count() const { return order_.size(); }

  // Layout of core/state_codec.h. load_state is for a fresh object with the
  // same spec; on failure the reader carries the error.
  void save_state(StateWriter& w) const;
  void load_state(StateReader& r);

 private:
  struct SeriesHold {
    TimePoint newest{};                        // newest time accepted for the series
    std::set<TimePoint> released;              // released times not older than newest - T (for duplicates)
    std::map<TimePoint, Observation> held;     // waiting, by time
  };
  void release_until(TimePoint through, std::vector<Observation>& ready);

  ArrivalSpec spec_;
  std::size_t max_series_;
  std::optional<TimePoint> clock_;                     // newest time seen (records or tick)
  std::map<std::string, SeriesHold> series_;
  std::set<std::pair<TimePoint, std::string>> order_;  // every held record, release order
};

}  // namespace tallyd
