// FeedSet: several feeds read as one stream, merged by time.
//
//   Result<FeedSet> feeds = FeedSet::open({"north.csv", "south.jsonl"}, ReadOptions{});
//   if (!feeds) { report(feeds.error().message); return; }
//   FeedItem item;
//   while (feeds->next(item)) item.is_record() ? ingest(item.record()) : count(item.rejection());
//
// The merge looks only at the next record of each feed and hands out the
// earliest of them; ties go to the feed given first. Each feed's records come
// out in that feed's own order (nothing is sorted), so a single feed comes out
// exactly as FeedFile reads it, and several time-ordered feeds come out in
// time order. A feed with a record out of order is not held back: the record
// comes out when it is that feed's turn, and judging it is the engine's
// business. Refusals are handed out as soon as they are read, ahead of the
// records waiting in other feeds; each carries its own source and line.
//
// Cost: O(log k) per item for k feeds; memory: one record per feed plus each
// FeedFile's buffers. Not thread-safe; movable, not copyable.
#pragma once

#include <chrono>
#include <cstddef>
#include <string>
#include <vector>

#include "core/observation.h"
#include "core/result.h"
#include "feed/feed_file.h"
#include "feed/feed_item.h"

namespace tallyd {

class FeedSet {
 public:
  // Opens every path with FeedFile::open. Fails when any of them fails; the
  // message lists every failure (each names its path), one per line.
  static Result<FeedSet> open(const std::vector<std::string>& paths, const ReadOptions& options);

  // Merges feeds already open; their order breaks ties.
  explicit FeedSet(std::vector<FeedFile> feeds);

  // The next record or refusal; false once every feed is exhausted (and on
  // every call after).
  bool next(FeedItem& out);

  std::size_t feed_count() const { return feeds_.size(); }

 private:
  struct HeapEntry {
    std::chrono::sys_seconds time;  // of the feed's waiting record
    std::size_t feed;               // index into feeds_
  };

  std::vector<FeedFile> feeds_;
  std::vector<Observation> heads_;       // heads_[i]: the waiting record of feed i, if in heap_
  std::vector<HeapEntry> heap_;          // feeds with a waiting record, earliest first
  std::vector<std::size_t> to_refill_;   // feeds whose next record must be read before choosing
  std::size_t refill_next_ = 0;          // position in to_refill_
  FeedItem scratch_;
};

}  // namespace tallyd
