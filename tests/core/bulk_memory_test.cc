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
