#include "engine/sharded_engine.h"

#include <algorithm>
#include <cmath>
#include <unordered_set>

#include <fmt/format.h>

#include "bounds/random.h"

namespace tallyd {
namespace {

// Engine creates a model for a record's series exactly when the record gets
// past these checks (engine.cc, in the same order) and the limit allows.
bool passes_engine_checks(const Observation& obs) {
  return !obs.series.empty() && obs.count >= 0 && std::isfinite(obs.exposure) && obs.exposure > 0;
}

}  // namespace

ShardedEngine::ShardedEngine(const SettingsTable& settings, int workers, EngineLimits limits)
    : limits_(limits), picks_(static_cast<std::size_t>(std::clamp(workers, 1, 64))), crew_(std::clamp(workers, 1, 64)) {
  // The shards never meet the limit themselves: admission happens here.
  EngineLimits unlimited;
  unlimited.max_series = limits.max_series;
  for (std::size_t i = 0; i < picks_.size(); ++i) shards_.push_back(std::make_unique<Engine>(settings, unlimited));
}

std::size_t ShardedEngine::shard_of(std::string_view series) const {
  return static_cast<std::size_t>(bounds::stable_hash(series) % shards_.size());
}

std::vector<IngestResult> ShardedEngine::ingest_batch(const std::vector<Observation>& batch) {
  std::vector<IngestResult> results(batch.size());
  for (std::vector<std::size_t>& p : picks_) p.clear();
  // Series this batch will create (the shards are idle here, so asking them
  // is safe). When even a new series per record stays within the limit, no
  // record can be refused and the set is not needed.
  const std::size_t existing = series_count();
  const bool may_refuse = batch.size() > limits_.max_series || existing > limits_.max_series - batch.size();
  std::unordered_set<std::string_view> created;
  for (std::size_t i = 0; i < batch.size(); ++i) {
    const Observation& obs = batch[i];
    const std::size_t owner = shard_of(obs.series);
    if (may_refuse && passes_engine_checks(obs) && created.count(obs.series) == 0 &&
        shards_[owner]->find(obs.series) == nullptr) {
      if (existing + created.size() >= limits_.max_series) {
        // Engine's own refusal, word for word.
        ++refused_here_;
        IngestResult& r = results[i];
        r.kind = IngestResult::Kind::rejected;
        r.rejection = Rejection{RejectReason::too_many_series, obs.where,
                                fmt::format("series '{}' would exceed the limit of {} series", obs.series,
                                            limits_.max_series)};
        continue;
      }
      created.insert(obs.series);
    }
    picks_[owner].push_back(i);
  }

  // Each worker writes only its own records' slots. A slot is an
  // IngestResult of several cache lines (696 bytes with g++ 12), written
  // once per record after tens of microseconds of judging, so two workers
  // share a line at most at a slot's edges: not worth a buffer per worker
  // and a serial copy.
  crew_.run([&](std::size_t worker) {
    Engine& engine = *shards_[worker];
    for (const std::size_t i : picks_[worker]) results[i] = engine.ingest(batch[i]);
  });
  return results;
}

EngineCounters ShardedEngine::counters() const {
  EngineCounters total;
  total.records = refused_here_;
  total.rejected.by_reason[static_cast<std::size_t>(RejectReason::too_many_series)] = refused_here_;
  for (const auto& e : shards_) {
    const EngineCounters& c = e->counters();
    total.records += c.records;
    total.judged += c.judged;
    total.warming_up += c.warming_up;
    total.alerts_high += c.alerts_high;
    total.alerts_low += c.alerts_low;
    total.alerts_shift += c.alerts_shift;
    total.alerts_low_run += c.alerts_low_run;
    total.alerts_fdr += c.alerts_fdr;
    total.alerts_silence += c.alerts_silence;
    total.silence_ends += c.silence_ends;
    total.duplicates_replaced += c.duplicates_replaced;
    for (std::size_t r = 0; r < kRejectReasonCount; ++r) total.rejected.by_reason[r] += c.rejected.by_reason[r];
  }
  return total;
}

std::size_t ShardedEngine::series_count() const {
  std::size_t n = 0;
  for (const auto& e : shards_) n += e->series_count();
  return n;
}

const SeriesModel* ShardedEngine::find(const std::string& series) const {
  return shards_[shard_of(series)]->find(series);
}

}  // namespace tallyd
