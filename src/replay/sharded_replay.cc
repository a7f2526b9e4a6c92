#include "replay/sharded_replay.h"

#include <algorithm>
#include <vector>

#include "engine/output_lines.h"

namespace tallyd {

std::uint64_t replay_feeds_sharded(FeedSet& feeds, ShardedEngine& engine, const ReplayOutputs& out,
                                   std::size_t batch_records) {
  batch_records = std::max<std::size_t>(batch_records, 1);
  std::uint64_t written = 0;
  // The same lines, in the same order, as replay_feeds writes.
  auto write = [&](const std::vector<OutputLine>& lines) {
    for (const OutputLine& l : lines) {
      if (out.alerts_json) *out.alerts_json << l.json << '\n';
      if (out.alerts_text) *out.alerts_text << l.text << '\n';
      written += l.alert ? 1 : 0;
    }
  };
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
      write(output_lines(r));
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
