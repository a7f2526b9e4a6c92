#include "core/bulk_allocator.h"

#include <map>
#include <string>

#include <catch2/catch.hpp>

using namespace tallyd;

namespace {

using Map = std::map<int, std::string, std::less<int>, BulkAllocator<std::pair<const int, std::string>>>;

// The address of the node holding `key` (a map node holds its value).
const void* node_of(const Map& m, int key) { return &*m.find(key); }

}  // namespace

TEST_CASE("a map on bulk memory takes its nodes from the mapping until it is trimmed", "[core][bulk]") {
  const std::shared_ptr<BulkMemory> memory = BulkMemory::create(1 << 20);
  REQUIRE(memory != nullptr);
  Map m{BulkAllocator<Map::value_type>(memory)};
  for (int i = 0; i < 100; ++i) m.emplace(i, "value " + std::to_string(i));
  CHECK(memory->used() >= 100 * sizeof(Map::value_type));
  for (int i = 0; i < 100; ++i) CHECK(memory->contains(node_of(m, i)));
  memory->trim();  // no more room: new nodes come from the heap
  for (int i = 100; i < 150; ++i) m.emplace(i, "value " + std::to_string(i));
  for (int i = 100; i < 150; ++i) CHECK_FALSE(memory->contains(node_of(m, i)));
  // Erasing frees heap nodes and leaves the mapping's (sanitizer builds
  // would report a bad free otherwise); the values stay right.
  for (int i = 0; i < 150; i += 2) m.erase(i);
  CHECK(m.size() == 75);
  for (const auto& [key, value] : m) CHECK(value == "value " + std::to_string(key));
  // Moving the map moves its allocator, and with it a share of the mapping.
  Map moved(std::move(m));
  CHECK(moved.get_allocator().memory() == memory);
  CHECK(memory.use_count() >= 2);
}

TEST_CASE("a bulk allocator without a mapping, and a copied map, use the heap", "[core][bulk]") {
  Map plain;
  plain.emplace(1, "one");
  CHECK(plain.get_allocator().memory() == nullptr);
  const std::shared_ptr<BulkMemory> memory = BulkMemory::create(1 << 20);
  REQUIRE(memory != nullptr);
  Map placed{BulkAllocator<Map::value_type>(memory)};
  placed.emplace(2, "two");
  CHECK(memory->contains(node_of(placed, 2)));
  const Map copy = placed;
  CHECK(copy.get_allocator().memory() == nullptr);
  CHECK_FALSE(memory->contains(node_of(copy, 2)));
  CHECK(copy.at(2) == "two");
  CHECK_FALSE(copy.get_allocator() == placed.get_allocator());
  // Move assignment takes the allocator along with the nodes.
  plain = std::move(placed);
  CHECK(plain.get_allocator().memory() == memory);
  CHECK(memory->contains(node_of(plain, 2)));
}
