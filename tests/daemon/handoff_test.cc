#include "daemon/handoff.h"

#include <catch2/catch.hpp>

#include <thread>

using namespace tallyd;
using namespace tallyd::daemon;

namespace {

// A batch of `lines` skip lines numbered `seq` (through its mark's offset).
LineBatch batch(std::uint64_t seq, std::size_t lines) {
  LineBatch b;
  b.lines.assign(lines, ParseOutcome::skip());
  b.mark = checkpoint::FileMark{};
  b.mark->offset = seq;
  return b;
}

std::uint64_t seq_of(const HandoffJob& job) { return std::get<LineBatch>(job).mark->offset; }

}  // namespace

TEST_CASE("handoff: batches and tasks come out in the order they went in", "[daemon][handoff]") {
  asio::io_context loop;
  Handoff h(loop, 100);
  std::vector<int> ran;
  h.push(batch(1, 2));
  h.post([&] { ran.push_back(1); });
  h.push(batch(2, 3));
  h.post([&] { ran.push_back(2); });
  CHECK(h.queued_lines() == 5);

  auto a = h.pop();
  REQUIRE(a);
  CHECK(seq_of(*a) == 1);
  auto t1 = h.pop();
  REQUIRE(t1);
  std::get<HandoffTask>(*t1)();
  auto b = h.pop();
  REQUIRE(b);
  CHECK(seq_of(*b) == 2);
  auto t2 = h.pop();
  REQUIRE(t2);
  std::get<HandoffTask>(*t2)();
  CHECK(ran == std::vector<int>{1, 2});
  // Lines count until the judging thread says they are done, not when popped.
  CHECK(h.queued_lines() == 5);
  h.done(2);
  h.done(3);
  CHECK(h.queued_lines() == 0);
}

TEST_CASE("handoff: the bound pauses producers, never refuses read lines, and resumes them at half",
          "[daemon][handoff]") {
  asio::io_context loop;
  Handoff h(loop, 10);
  int resumed = 0;
  h.push(batch(1, 4));
  h.push(batch(2, 4));
  CHECK(h.has_room());  // 8 < 10
  h.push(batch(3, 4));  // a read already done is queued even past the bound
  CHECK(h.queued_lines() == 12);
  CHECK_FALSE(h.has_room());
  h.when_room([&] { ++resumed; });
  loop.poll();
  CHECK(resumed == 0);  // still full

  h.done(4);  // 8 left: room again (below 10), but not yet below half
  loop.poll();
  CHECK(h.has_room());
  CHECK(resumed == 0);
  h.done(4);  // 4 left, below 5: the paused producer is resumed on the loop
  CHECK(resumed == 0);  // posted, not called from the judging side
  loop.restart();
  loop.poll();
  CHECK(resumed == 1);

  // With room now, the resume is posted at once (not called inside when_room).
  h.when_room([&] { ++resumed; });
  CHECK(resumed == 1);
  loop.restart();
  loop.poll();
  CHECK(resumed == 2);
}

TEST_CASE("handoff: close drains what is queued, then ends, and later input is not taken", "[daemon][handoff]") {
  asio::io_context loop;
  Handoff h(loop, 10);
  int resumed = 0;
  h.push(batch(1, 6));
  h.push(batch(2, 6));
  h.when_room([&] { ++resumed; });  // paused
  h.close();
  h.push(batch(3, 1));
  h.post([] {});
  for (std::uint64_t want : {1, 2}) {
    auto job = h.pop();
    REQUIRE(job);
    CHECK(seq_of(*job) == want);
    h.done(6);
  }
  CHECK_FALSE(h.pop());
  loop.poll();
  CHECK(resumed == 0);  // a stopping service resumes nobody
}

TEST_CASE("handoff: one producer and one judging thread keep order and the bound", "[daemon][handoff]") {
  // The producer runs on `loop` as the event-loop thread does: it pushes while
  // there is room and otherwise waits for when_room. Counts bound the test.
  asio::io_context loop;
  auto guard = asio::make_work_guard(loop);
  constexpr std::size_t kCapacity = 64, kBatch = 5;
  constexpr std::uint64_t kBatches = 5000;
  Handoff h(loop, kCapacity);
  std::uint64_t next = 0;
  std::size_t most_queued = 0;
  std::function<void()> produce = [&] {
    while (next < kBatches && h.has_room()) {
      h.push(batch(next++, kBatch));
      most_queued = std::max(most_queued, h.queued_lines());
    }
    if (next < kBatches) h.when_room(produce);
    else h.close();
  };
  std::vector<std::uint64_t> seen;
  std::thread judge([&] {
    while (auto job = h.pop()) {
      seen.push_back(seq_of(*job));
      h.done(std::get<LineBatch>(*job).lines.size());
    }
    asio::post(loop, [&] { guard.reset(); });
  });
  asio::post(loop, produce);
  loop.run();
  judge.join();
  REQUIRE(seen.size() == kBatches);
  for (std::uint64_t i = 0; i < kBatches; ++i) REQUIRE(seen[i] == i);
  CHECK(most_queued <= kCapacity - 1 + kBatch);  // pushed only with room: at most one batch past the bound
  CHECK(h.queued_lines() == 0);
}
