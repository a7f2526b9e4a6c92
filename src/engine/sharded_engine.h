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
// Threads: a WorkerCrew (engine/worker_crew.h) owned for the object's
// lifetime: one thread per extra worker, started by the constructor and
// joined by the destructor; worker 0 is the thread calling ingest_batch.
// A worker touches its shard only inside ingest_batch, which returns when
// every worker has finished the batch; an exception thrown on a worker
// reaches the caller of ingest_batch (the shards then hold whatever the
// batch had done, as an Engine does after a throwing ingest). The object
// itself is not thread-safe: one caller at a time.
//
// Batch size is the caller's trade-off. Every batch ends at a barrier: the
// batch takes as long as its slowest shard, and the other workers wait.
// Larger batches even out the shards' loads (more records per shard, so
// uneven record costs -- screened records, refits of varying iterations --
// average out) and pay the handoff fewer times, but a record's result is
// only returned when its whole batch is done, so the delay to an alert grows
// with the batch. Measured (docs/benchmarks.md, "Threads, fourth pass"):
// on 1,000 daily series, batches of one day (1,000 records) already keep
// the barrier's cost to a few percent; replay (replay/sharded_replay.h)
// uses 8,192, where the delay does not matter.
#pragma once

#include <cstddef>
#include <memory>
#include <string>
#include <string_view>
#include <vector>

#include "engine/engine.h"
#include "engine/worker_crew.h"

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
  // Seconds each worker spent judging and seconds spent in batches, over
  // the object's life (WorkerCrew::busy_seconds): for benchmarks.
  const std::vector<double>& worker_busy_seconds() const { return crew_.busy_seconds(); }
  double batch_seconds() const { return crew_.round_seconds(); }
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
  // Per worker, the batch's records it owns, in batch order (filled by the
  // caller, only read by the workers); kept between batches for their capacity.
  std::vector<std::vector<std::size_t>> picks_;
  WorkerCrew crew_;                 // declared last: its threads stop before the shards go
};

}  // namespace tallyd
