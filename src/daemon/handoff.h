// Handoff: the bounded, ordered queue between the two threads of `tallyd
// serve`. The event-loop thread reads every source and decodes its lines; the
// judging thread (daemon/judge_thread.h) owns the engine and judges them.
//
// Contract
// - Order: batches (push) and tasks (post) go into one FIFO; the judging
//   thread gets them exactly in the order they were handed over.
// - Bound: has_room() is true while fewer than `capacity` lines are queued
//   (pushed and not yet reported done()). A producer reads more only while
//   has_room(); push() itself never refuses, because the bytes of a batch
//   were already read and must not be lost. So at most `capacity` lines plus
//   one read per producer are queued (a batch is at most one read: one poll
//   budget of a followed file, one socket read, one datagram). Tasks do not
//   count against the bound.
// - Backpressure: when_room(resume) runs `resume` on the loop thread (posted
//   to `loop`) once fewer than capacity / 2 lines are queued, or soon (still
//   posted) when has_room() already. A stream that found no room pauses and
//   is resumed there; the gap between the two marks keeps it from waking for
//   every finished batch.
// - Stop: close() takes no more batches or tasks (they are dropped) and
//   forgets waiting resumes; what is already queued is still handed out, so
//   the judging thread drains it. pop() returns nullopt once closed and empty.
//
// Threads: push, post, when_room, close and has_room from the loop thread
// (the producer); pop and done from the judging thread (the consumer);
// queued_lines from any thread. Internally one mutex and one condition
// variable; `loop` must outlive the Handoff.
#pragma once

#include <condition_variable>
#include <cstddef>
#include <deque>
#include <functional>
#include <mutex>
#include <optional>
#include <variant>
#include <vector>

#include <asio.hpp>

#include "daemon/line_batch.h"

namespace tallyd::daemon {

using HandoffTask = std::function<void()>;
using HandoffJob = std::variant<LineBatch, HandoffTask>;

class Handoff {
 public:
  // `capacity` lines, at least 2.
  Handoff(asio::io_context& loop, std::size_t capacity);
  Handoff(const Handoff&) = delete;
  Handoff& operator=(const Handoff&) = delete;

  // Loop thread.
  bool has_room() const;
  void push(LineBatch batch);
  void post(HandoffTask task);
  void when_room(std::function<void()> resume);
  void close();

  // Judging thread. pop() blocks; done(n) after the n lines of a popped batch are judged.
  std::optional<HandoffJob> pop();
  void done(std::size_t lines);

  std::size_t queued_lines() const;
  std::size_t capacity() const { return capacity_; }

 private:
  asio::io_context* loop_;
  const std::size_t capacity_;
  mutable std::mutex mutex_;
  std::condition_variable ready_;
  std::deque<HandoffJob> jobs_;                       // guarded by mutex_
  std::size_t queued_ = 0;                            // lines pushed, not done; guarded by mutex_
  bool closed_ = false;                               // guarded by mutex_
  std::vector<std::function<void()>> waiting_;        // resumes for when room comes back; guarded by mutex_
};

}  // namespace tallyd::daemon
