// Many series judged on several worker threads, with the same results as
// one Engine.
//
// Series never interact inside an Engine (each record touches only its own
// series' model), so the series are split into shards by a stable hash of
// the id, each shard owned by one Engine on one worker thread. A batch of
// records is handed out by shard, each worker walks its records in batch
// order, and every result is written to the slot of its record: the output
// is in input order and identical to what one Engine fed the same records
// one by one would return, whatever the number of workers or the thread
// timing (simulated draws are seeded per record, not per thread).
//
// The only cross-series rule, the series limit, is applied by the caller's
// thread before the batch is handed out, in record order, exactly as Engine
// applies it; so it too is independent of the sharding.
//
// Threads: one per extra worker, started per batch and joined before
// ingest_batch returns (worker 0 is the calling thread), so no thread
// outlives a call and nothing is shared between batches. The object itself
// is not thread-safe: one caller at a time.
#pragma once

#include <cstddef>
#include <memory>
#include <string>
#include <string_view>
#include <vector>

#include "engine/engine.h"

namespace tallyd {

class ShardedEngine {
 public:
  // `settings` must outlive the object. workers is clamped to [1, 64].
  ShardedEngine(const SettingsTable& settings, int workers, EngineLimits limits = {});

  // results[i] is the outcome of batch[i]. Records of one series must be in
  // time order across batches, as for Engine::ingest.
  std::vector<IngestResult> ingest_batch(const std::vector<Observation>& batch);

  // Counts a refusal made before the engine (by a parser), as Engine::count_rejection.
  void count_rejection(RejectReason reason) { shards_.front()->count_rejection(reason); }

  int workers() const { return static_cast<int>(shards_.size()); }
  // Which worker owns `series`: stable_hash(series) mod workers.
  std::size_t shard_of(std::string_view series) const;
  // Counters summed over the shards, plus records refused here for the
  // series limit: the same totals one Engine would report.
  EngineCounters counters() const;
  std::size_t series_count() const;
  // The model of `series`, or null.
  const SeriesModel* find(const std::string& series) const;

 private:
  std::vector<std::unique_ptr<Engine>> shards_;
  EngineLimits limits_;
  std::uint64_t refused_here_ = 0;  // records refused here (too_many_series)
};

}  // namespace tallyd
