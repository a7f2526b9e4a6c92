#include "series/model_handle.h"

#include <catch2/catch.hpp>

#include "core/bulk_memory.h"

using namespace tallyd;

// A model placed in a bulk mapping lives inside it and keeps the mapping
// alive until it is destroyed; without room (or without a mapping) it goes
// on the heap. Either way it is the same model.
TEST_CASE("make_model places a model in offered memory or on the heap", "[series]") {
  SeriesSettings settings;
  settings.model.family = glm::Family::poisson;
  std::shared_ptr<BulkMemory> bulk = BulkMemory::create(1 << 20);
  REQUIRE(bulk != nullptr);
  const char* base = static_cast<const char*>(bulk->take(1));
  const std::weak_ptr<BulkMemory> watch = bulk;
  auto placed = std::make_unique<ModelHandle>(make_model("a", settings, bulk));
  ModelHandle& model = *placed;
  const char* at = reinterpret_cast<const char*>(model.get());
  CHECK(at > base);
  CHECK(at < base + (1 << 20));
  CHECK(model.get_deleter().placed_in == bulk);
  ModelHandle heap = make_model("b", settings, nullptr);
  CHECK(heap.get_deleter().placed_in == nullptr);
  CHECK(model->id() == "a");
  CHECK(heap->id() == "b");
  CHECK(model->min_history() == heap->min_history());
  // From std::make_unique, as the engine makes models for new series.
  ModelHandle converted = std::make_unique<SeriesModel>("c", settings);
  CHECK(converted.get_deleter().placed_in == nullptr);
  bulk.reset();
  CHECK_FALSE(watch.expired());  // the placed model holds the mapping
  placed.reset();  // the handle goes, and with it its share of the mapping
  CHECK(watch.expired());
}
