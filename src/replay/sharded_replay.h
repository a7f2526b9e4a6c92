// Replay on several worker threads: the data path of `tallyd replay
// --workers N`, the same as replay_feeds but through a ShardedEngine.
//
// Records are read in merged time order into batches of `batch_records`,
// each batch is judged by the shards in parallel, and the alerts are written
// in record order, so the alert output is byte-identical to replay_feeds
// with one Engine, episode closings included (engine/sharded_engine.h says
// why the results are; episode ids are per series). A
// parser's refusals are reported as they are read, before the alerts of
// the batch they fall in; the engine's own refusals in record order.
// Not supported here (the caller refuses them): the control across series
// ([fdr]), the arrival hold and the silence watch, which keep one clock
// over all series (Engine::offer), and the report traces.
#pragma once

#include <cstddef>
#include <cstdint>

#include "engine/sharded_engine.h"
#include "feed/feed_merge.h"
#include "replay/replay.h"

namespace tallyd {

// Returns the number of alerts written. `batch_records` is clamped to at least 1.
std::uint64_t replay_feeds_sharded(FeedSet& feeds, ShardedEngine& engine, const ReplayOutputs& out,
                                   std::size_t batch_records = 8192);

}  // namespace tallyd
