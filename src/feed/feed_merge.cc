#include "feed/feed_merge.h"

#include <algorithm>
#include <utility>

namespace tallyd {
namespace {

// Heap order: std::push_heap keeps the greatest element first, so "greater"
// here means later, and the earliest record (first feed on ties) is on top.
struct Later {
  template <class Entry>
  bool operator()(const Entry& a, const Entry& b) const {
    if (a.time != b.time) return a.time > b.time;
    return a.feed > b.feed;
  }
};

}  // namespace

Result<FeedSet> FeedSet::open(const std::vector<std::string>& paths, const ReadOptions& options) {
  std::vector<FeedFile> feeds;
  feeds.reserve(paths.size());
  std::string failures;
  for (const std::string& path : paths) {
    Result<FeedFile> feed = FeedFile::open(path, options);
    if (!feed) {
      if (!failures.empty()) failures += "\n";
      failures += feed.error().message;
      continue;
    }
    feeds.push_back(std::move(feed).value());
  }
  if (!failures.empty()) return Error{failures};
  return FeedSet(std::move(feeds));
}

FeedSet::FeedSet(std::vector<FeedFile> feeds) : feeds_(std::move(feeds)), heads_(feeds_.size()) {
  heap_.reserve(feeds_.size());
  to_refill_.reserve(feeds_.size());
  for (std::size_t i = 0; i < feeds_.size(); ++i) to_refill_.push_back(i);
}

bool FeedSet::next(FeedItem& out) {
  // Every feed needs a waiting record (or to be exhausted) before the
  // earliest can be chosen. A refusal met on the way goes out at once; the
  // same feed is asked again on the next call.
  while (refill_next_ < to_refill_.size()) {
    const std::size_t i = to_refill_[refill_next_];
    if (!feeds_[i].next(scratch_)) {
      ++refill_next_;  // exhausted
      continue;
    }
    if (!scratch_.is_record()) {
      out.value = std::move(scratch_.rejection());
      return true;
    }
    // Swapped rather than moved, here and below: the strings and covariate
    // lists go round between scratch_, heads_ and the caller's item, so
    // parsing the next record into scratch_ reuses their capacity.
    std::swap(heads_[i], scratch_.record());
    heap_.push_back(HeapEntry{heads_[i].time, i});
    std::push_heap(heap_.begin(), heap_.end(), Later{});
    ++refill_next_;
  }
  to_refill_.clear();
  refill_next_ = 0;
  if (heap_.empty()) return false;

  std::pop_heap(heap_.begin(), heap_.end(), Later{});
  const std::size_t i = heap_.back().feed;
  heap_.pop_back();
  if (out.is_record()) {
    std::swap(out.record(), heads_[i]);
  } else {
    out.value = std::move(heads_[i]);
  }
  to_refill_.push_back(i);
  return true;
}

}  // namespace tallyd
