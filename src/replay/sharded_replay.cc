#include "replay/sharded_replay.h"

#include <algorithm>
#include <vector>


namespace tallyd {

std::uint64_t replay_feeds_sharded(FeedSet& feeds, ShardedEngine& engine, const ReplayOutputs& out,
                                   std::size_t batch_records) {
  batch_records = std::max<std::size_t>(batch_records, 1);
  std::uint64_t written = 0;
  std::vector<Observation> batch;
  batch.reserve(batch_records);
  const auto run_batch = [&] {
    const std::vector<IngestResult> results = engine.ingest_batch(batch);
    for (std::size_t i = 0; i < results.size(); ++i) {
      const IngestResult& r = results[i];
      if (r.rejection) {
        if (out.on_rejection) out.on_rejection(*r.rejection);
        continue;
      }
      if (out.on_record) out.on_record(batch[i], r);
      written += write_lines(out, output_lines(r));  // the same lines, in the same order, as replay_feeds
    }
    batch.clear();
  };
  FeedItem item;
  while (feeds.next(item)) {
    if (!item.is_record()) {
      const Rejection& bad = item.rejection();
      engine.count_rejection(bad.reason);
      if (out.on_rejection) out.on_rejection(bad);
      continue;
    }
    batch.push_back(item.record());
    if (batch.size() >= batch_records) run_batch();
  }
  if (!batch.empty()) run_batch();
  return written;
}

}  // namespace tallyd
