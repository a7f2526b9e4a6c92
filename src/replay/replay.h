// Replaying feed files through the engine: the data path of `tallyd replay`
// from merged feed items to written alerts, with no command-line concerns.
#pragma once

#include <cstdint>
#include <functional>
#include <ostream>
#include <string>
#include <vector>

#include "core/reject.h"
#include "engine/engine.h"
#include "engine/output_lines.h"
#include "feed/feed_merge.h"

namespace tallyd {

struct ReplayOutputs {
  // JSON Lines, one object per alert and per episode closing (engine/output_lines.h); null = not written
  std::ostream* alerts_json = nullptr;
  std::ostream* alerts_text = nullptr;  // the human-readable twin of each line; null = not written
  // Called for every refused record (parser or engine), in feed order.
  std::function<void(const Rejection&)> on_rejection;
  // Called for every record the engine accepted (judged or warming up), in
  // feed order, after ingest; for tuning and reports. Null = not called.
  std::function<void(const Observation&, const IngestResult&)> on_record;
};

// Writes `lines` to the outputs that are set; returns how many of them are
// alerts (closing lines are not). Shared by the one- and many-thread replays.
std::uint64_t write_lines(const ReplayOutputs& out, const std::vector<OutputLine>& lines);

// Feeds every item of `feeds` through `engine` in merged time order and
// writes each alert and episode closing as it comes. Returns the number of
// alerts written (closing lines are not alerts).
std::uint64_t replay_feeds(FeedSet& feeds, Engine& engine, const ReplayOutputs& out);

// "1234 records: 1100 judged, 100 warming up, 34 rejected (bad_count 3, ...); 12 alerts (10 high, 2 low); 24 series"
std::string describe_counters(const EngineCounters& c, std::size_t series_count);

}  // namespace tallyd
