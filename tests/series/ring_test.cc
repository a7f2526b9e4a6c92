#include "series/ring.h"

#include <array>
#include <cstdint>
#include <deque>
#include <vector>

#include <catch2/catch.hpp>

using namespace tallyd;

namespace {

// The rows of `ring` equal those of `reference` (std::deque, the standard
// library's double-ended queue, as the oracle), oldest first.
template <std::size_t W>
void check_same(const Ring<double>& ring, const std::deque<std::array<double, W>>& reference) {
  REQUIRE(ring.size() == reference.size());
  for (std::size_t i = 0; i < reference.size(); ++i)
    for (std::size_t c = 0; c < W; ++c) REQUIRE(ring.row(i)[c] == reference[i][c]);
}

// A small linear congruential generator (Knuth's MMIX constants), so the
// operation sequence is the same on every platform.
struct Lcg {
  std::uint64_t state = 12345;
  std::uint64_t next() {
    state = state * 6364136223846793005ull + 1442695040888963407ull;
    return state >> 33;
  }
};

template <std::size_t W>
void random_walk_against_deque(std::size_t max_rows) {
  Ring<double> ring(W, max_rows);
  std::deque<std::array<double, W>> reference;
  Lcg rng;
  double value = 0;
  for (int step = 0; step < 4000; ++step) {
    const std::uint64_t op = rng.next() % 10;
    if (op < 6 || reference.empty()) {  // push more often than pop, so the ring wraps and grows
      std::array<double, W> row{};
      for (double& v : row) v = ++value;
      ring.push_back(row.data());
      reference.push_back(row);
    } else if (op < 9) {
      const std::size_t n = 1 + rng.next() % std::min<std::size_t>(reference.size(), 5);
      ring.pop_front(n);
      for (std::size_t i = 0; i < n; ++i) reference.pop_front();
    } else {
      // A window of at most max_rows records, trimmed as series_model trims it.
      while (reference.size() > max_rows) {
        ring.pop_front();
        reference.pop_front();
      }
    }
    check_same<W>(ring, reference);
  }
}

}  // namespace

TEST_CASE("a ring keeps rows in the order of std::deque's push_back and pop_front", "[series][ring]") {
  random_walk_against_deque<1>(156);
  random_walk_against_deque<3>(20);
  random_walk_against_deque<6>(7);
}

TEST_CASE("a ring grows by doubling up to its row limit, then doubles past it", "[series][ring]") {
  Ring<double> ring(2, 156);
  std::vector<std::size_t> capacities;
  for (int i = 0; i < 156; ++i) {
    const std::size_t before = ring.capacity();
    *ring.push_back() = i;
    if (ring.capacity() != before) capacities.push_back(ring.capacity());
  }
  CHECK(capacities == std::vector<std::size_t>{8, 16, 32, 64, 128, 156});
  // A window of 156: drop the oldest, push the newest, never a new block.
  const double* block_start = ring.row(0);
  for (int i = 156; i < 1000; ++i) {
    ring.pop_front();
    *ring.push_back() = i;
  }
  CHECK(ring.capacity() == 156);
  CHECK(ring.row(0)[0] == 1000 - 156);
  CHECK(ring.row(155)[0] == 999);
  // The block is the same one (some row sits at its start again).
  bool same_block = false;
  for (std::size_t i = 0; i < ring.size(); ++i) same_block = same_block || ring.row(i) == block_start;
  CHECK(same_block);
  ring.push_back();
  CHECK(ring.capacity() == 312);
  CHECK(ring.size() == 157);
  CHECK(ring.row(0)[0] == 1000 - 156);
}

TEST_CASE("a reserved ring fills without another block, and clear keeps the block", "[series][ring]") {
  Ring<std::int64_t> ring(1, 50);
  ring.reserve(300);  // past the row limit: reserve is exact
  CHECK(ring.capacity() == 300);
  std::int64_t* first = ring.push_back();
  *first = -7;
  for (std::int64_t i = 1; i < 300; ++i) *ring.push_back() = i;
  CHECK(ring.capacity() == 300);
  CHECK(ring.row(0) == first);
  CHECK(*ring.row(0) == -7);
  CHECK(*ring.row(299) == 299);
  ring.clear();
  CHECK(ring.empty());
  CHECK(ring.capacity() == 300);
  ring.reserve(10);  // never shrinks
  CHECK(ring.capacity() == 300);
}

TEST_CASE("a ring copies its rows in order and moves its block", "[series][ring]") {
  Ring<double> ring(2, 4);
  for (int i = 0; i < 6; ++i) {
    if (ring.size() == 4) ring.pop_front();
    double row[2] = {static_cast<double>(i), -static_cast<double>(i)};
    ring.push_back(row);
  }
  // Rows 2..5, wrapped in a block of 4.
  const Ring<double> copy(ring);
  REQUIRE(copy.size() == 4);
  CHECK(copy.capacity() == 4);
  for (std::size_t i = 0; i < 4; ++i) {
    CHECK(copy.row(i)[0] == static_cast<double>(i + 2));
    CHECK(copy.row(i)[1] == -static_cast<double>(i + 2));
  }
  Ring<double> assigned(5);
  assigned = copy;
  CHECK(assigned.width() == 2);
  CHECK(assigned.row(3)[0] == 5);
  const double* block = ring.row(0);
  Ring<double> moved(std::move(ring));
  CHECK(moved.row(0) == block);
  CHECK(moved.size() == 4);
  CHECK(ring.empty());  // NOLINT(bugprone-use-after-move): the contract says empty
}

TEST_CASE("a ring of width 0 counts rows and allocates nothing", "[series][ring]") {
  Ring<double> ring(0, 10);
  for (int i = 0; i < 25; ++i) CHECK(ring.push_back() == nullptr);
  CHECK(ring.size() == 25);
  CHECK(ring.capacity() == 0);
  ring.pop_front(20);
  CHECK(ring.size() == 5);
  CHECK(ring.row(4) == nullptr);
}
