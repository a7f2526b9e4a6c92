#include "core/bulk_memory.h"

#include <cstdint>
#include <cstring>

#include <catch2/catch.hpp>

using namespace tallyd;

TEST_CASE("bulk memory hands out aligned, zeroed, distinct pieces until it is full", "[core][bulk]") {
  const std::shared_ptr<BulkMemory> m = BulkMemory::create(BulkMemory::kChunk + 100);
  REQUIRE(m != nullptr);
  char* a = static_cast<char*>(m->take(10));
  char* b = static_cast<char*>(m->take(BulkMemory::kChunk));  // crosses the first prefaulted chunk
  REQUIRE(a != nullptr);
  REQUIRE(b != nullptr);
  CHECK(reinterpret_cast<std::uintptr_t>(a) % 64 == 0);
  CHECK(reinterpret_cast<std::uintptr_t>(b) % 64 == 0);
  CHECK(b >= a + 10);
  CHECK(m->used() == 64 + BulkMemory::kChunk);
  // Fresh anonymous memory reads as zero, and every byte can be written.
  CHECK(a[0] == 0);
  CHECK(b[BulkMemory::kChunk - 1] == 0);
  std::memset(b, 0x5a, BulkMemory::kChunk);
  std::memset(a, 0x11, 10);
  CHECK(b[0] == 0x5a);
  CHECK(a[9] == 0x11);
  // The mapping is rounded up to whole huge pages, never beyond them.
  CHECK(m->take(std::size_t{8} << 20) == nullptr);
  CHECK(m->take(std::size_t{1} << 40) == nullptr);
}

TEST_CASE("trimmed bulk memory keeps its pieces and hands out no more", "[core][bulk]") {
  const std::shared_ptr<BulkMemory> m = BulkMemory::create(std::size_t{256} << 20);
  REQUIRE(m != nullptr);
  auto* p = static_cast<std::uint64_t*>(m->take(1000 * sizeof(std::uint64_t)));
  REQUIRE(p != nullptr);
  for (std::uint64_t i = 0; i < 1000; ++i) p[i] = i * i;
  m->trim();
  CHECK(m->take(1) == nullptr);
  CHECK(p[999] == 999u * 999u);
}

TEST_CASE("bulk memory aligns each piece as asked and packs small alignments", "[core][bulk]") {
  const std::shared_ptr<BulkMemory> m = BulkMemory::create(1 << 20);
  REQUIRE(m != nullptr);
  char* a = static_cast<char*>(m->take(3, 1));
  char* b = static_cast<char*>(m->take(8, 4));
  char* c = static_cast<char*>(m->take(16, 16));
  char* d = static_cast<char*>(m->take(1));  // the default: 64
  REQUIRE((a && b && c && d));
  CHECK(b == a + 4);
  CHECK(c == a + 16);
  CHECK(reinterpret_cast<std::uintptr_t>(d) % 64 == 0);
  CHECK(d == a + 64);
  CHECK(m->used() == 65);
  CHECK(m->contains(a));
  CHECK(m->contains(d));
  int on_stack = 0;
  CHECK_FALSE(m->contains(&on_stack));
  const auto heap = std::make_unique<char[]>(16);
  CHECK_FALSE(m->contains(heap.get()));
}

// With a prefaulting thread the pieces are the same: zeroed, distinct,
// writable, kept after trim; the thread ends at trim (or with the mapping,
// even while take() is still far from its end).
TEST_CASE("bulk memory prefaulted on a thread of its own hands out the same pieces", "[core][bulk]") {
  const std::size_t size = std::size_t{64} << 20;
  for (bool trimmed : {true, false}) {
    INFO("trimmed " << trimmed);
    const std::shared_ptr<BulkMemory> m = BulkMemory::create(size, /*prefault_ahead=*/true);
    REQUIRE(m != nullptr);
    CHECK(m->prefaulting());
    std::vector<std::uint64_t*> pieces;
    const std::size_t piece = 100'000;  // crosses huge pages at odd places
    const std::size_t count = trimmed ? size / piece : 50;
    for (std::size_t i = 0; i < count; ++i) {
      auto* p = static_cast<std::uint64_t*>(m->take(piece, 8));
      if (p == nullptr) break;
      CHECK(p[0] == 0);
      CHECK(p[piece / 8 - 1] == 0);
      p[0] = i;
      p[piece / 8 - 1] = ~i;
      pieces.push_back(p);
    }
    REQUIRE(pieces.size() >= 50);
    CHECK(m->take(size) == nullptr);
    if (trimmed) {
      m->trim();
      CHECK_FALSE(m->prefaulting());
      CHECK(m->take(1) == nullptr);
    }
    for (std::size_t i = 0; i < pieces.size(); ++i) {
      REQUIRE(pieces[i][0] == i);
      REQUIRE(pieces[i][piece / 8 - 1] == ~i);
    }
  }
}
