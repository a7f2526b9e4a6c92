#include "engine/worker_crew.h"

#include <chrono>
#include <set>
#include <stdexcept>
#include <thread>
#include <vector>

#include <catch2/catch.hpp>

using namespace tallyd;

// The reference here is the crew's own contract (engine/worker_crew.h):
// each round runs task(w) exactly once per worker, worker 0 on the caller,
// the others on threads that last as long as the crew.
TEST_CASE("a crew runs every worker once per round, each on the same thread every round", "[engine]") {
  WorkerCrew crew(3);
  REQUIRE(crew.size() == 3);
  constexpr int kRounds = 200;
  // Written by each worker into its own slot without a lock: run() must make
  // the writes visible when it returns (ThreadSanitizer checks it too).
  std::vector<int> runs(3, 0);
  std::vector<std::thread::id> ids(3);
  std::vector<std::set<std::thread::id>> seen(3);
  for (int round = 0; round < kRounds; ++round) {
    crew.run([&](std::size_t w) {
      ++runs[w];
      ids[w] = std::this_thread::get_id();
    });
    for (std::size_t w = 0; w < 3; ++w) seen[w].insert(ids[w]);
    REQUIRE(runs == std::vector<int>(3, round + 1));
  }
  CHECK(seen[0] == std::set<std::thread::id>{std::this_thread::get_id()});
  CHECK(seen[1].size() == 1);  // one thread for the crew's life, not one per round
  CHECK(seen[2].size() == 1);
  CHECK(*seen[1].begin() != *seen[2].begin());
  CHECK(*seen[1].begin() != std::this_thread::get_id());
  CHECK(crew.busy_seconds().size() == 3);
}

TEST_CASE("a round returns only when its slowest worker is done", "[engine]") {
  WorkerCrew crew(2);
  for (int round = 0; round < 3; ++round) {
    bool slow_done = false;
    crew.run([&](std::size_t w) {
      if (w == 1) {
        std::this_thread::sleep_for(std::chrono::milliseconds(20));
        slow_done = true;
      }
    });
    CHECK(slow_done);
  }
  // The caller's worker did nothing, so it was idle for most of each round.
  CHECK(crew.busy_seconds()[1] >= 0.06);
  CHECK(crew.round_seconds() >= crew.busy_seconds()[1]);
  CHECK(crew.busy_seconds()[0] < crew.busy_seconds()[1]);
}

TEST_CASE("an exception on a worker reaches the caller after the round, and the crew goes on", "[engine]") {
  WorkerCrew crew(3);
  std::vector<int> runs(3, 0);
  const auto failing = [&](std::size_t w) {
    ++runs[w];
    if (w == 2) throw std::runtime_error("worker 2 failed");
    if (w == 1) throw std::logic_error("worker 1 failed");
  };
  // Two workers throw: the lowest-numbered one's exception comes back.
  CHECK_THROWS_WITH(crew.run(failing), "worker 1 failed");
  CHECK(runs == std::vector<int>{1, 1, 1});  // every worker finished the round
  const auto only_two = [&](std::size_t w) {
    ++runs[w];
    if (w == 2) throw std::runtime_error("worker 2 failed");
  };
  CHECK_THROWS_AS(crew.run(only_two), std::runtime_error);
  CHECK(runs == std::vector<int>{2, 2, 2});
  // The caller's own worker throwing is treated the same way.
  CHECK_THROWS_WITH(crew.run([&](std::size_t w) {
    ++runs[w];
    if (w == 0) throw std::runtime_error("worker 0 failed");
  }), "worker 0 failed");
  CHECK(runs == std::vector<int>{3, 3, 3});
  crew.run([&](std::size_t w) { ++runs[w]; });
  CHECK(runs == std::vector<int>{4, 4, 4});
}

TEST_CASE("a crew of one runs on the caller, and crews stop cleanly without a round", "[engine]") {
  WorkerCrew one(0);
  REQUIRE(one.size() == 1);
  std::thread::id ran_on;
  one.run([&](std::size_t) { ran_on = std::this_thread::get_id(); });
  CHECK(ran_on == std::this_thread::get_id());
  for (int i = 0; i < 20; ++i) WorkerCrew idle(4);  // started and joined, never run
}
