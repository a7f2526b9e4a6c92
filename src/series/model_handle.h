// ModelHandle: how the engine owns a series model. A model is either on the
// heap (new) or, after a restore, placed in the restore's bulk mapping
// (core/bulk_memory.h) next to its history.
//
// Why: a restore of 100,000 series made 100,000 heap models of ~600 bytes,
// whose 4 KiB pages each cost a page fault on first touch (~20 us on the
// build machine's VM); in the bulk mapping they share prefaulted huge pages.
//
// Contract:
// - ModelRelease deletes a heap model, or destroys a placed one in place;
//   it holds a share of the mapping, so the mapping outlives the model's
//   destructor and goes with the last handle (or map node) holding it. A handle made from std::make_unique converts
//   implicitly (heap model).
// - make_model(id, settings, bulk) places the model in `bulk` when it is
//   non-null and has room, else allocates it; the model is the same either way.
#pragma once

#include <memory>
#include <new>
#include <string>

#include "core/bulk_memory.h"
#include "series/series_model.h"

namespace tallyd {

struct ModelRelease {
  ModelRelease() = default;
  // A heap model (what std::make_unique made).
  ModelRelease(std::default_delete<SeriesModel>) {}  // NOLINT(google-explicit-constructor): implicit on purpose
  explicit ModelRelease(std::shared_ptr<BulkMemory> placed_in) : placed_in(std::move(placed_in)) {}

  void operator()(SeriesModel* model) const {
    if (placed_in) model->~SeriesModel();
    else delete model;
  }

  // The mapping a placed model lives in; null for a heap model.
  std::shared_ptr<BulkMemory> placed_in;
};

using ModelHandle = std::unique_ptr<SeriesModel, ModelRelease>;

inline ModelHandle make_model(std::string id, const SeriesSettings& settings,
                              const std::shared_ptr<BulkMemory>& bulk) {
  if (void* at = bulk ? bulk->take(sizeof(SeriesModel), alignof(SeriesModel)) : nullptr)
    return ModelHandle(new (at) SeriesModel(std::move(id), settings), ModelRelease(bulk));
  return ModelHandle(new SeriesModel(std::move(id), settings));
}

}  // namespace tallyd
