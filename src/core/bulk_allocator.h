// BulkAllocator<T>: a standard allocator that takes from a BulkMemory
// mapping (core/bulk_memory.h) while it has room, else from the heap; for
// the nodes of containers that a restore fills in bulk (the engine's maps).
//
// Why: a restore of 100,000 series made two map nodes per series on the
// heap, ~21 MB in fresh 4 KiB pages, each first touch a fault that on the
// build machine's VM costs about three times as much per byte as the
// mapping's prefaulted huge pages (docs/benchmarks.md, "Restart, ninth
// pass").
//
// Contract:
// - A default-constructed allocator (no mapping) is std::allocator.
// - With a mapping, allocate(n) takes n objects' bytes from it (aligned for
//   T) while take() gives them, else allocates on the heap; deallocate frees
//   heap blocks only, a block of the mapping going with the mapping. Each
//   copy holds a share of the mapping, so a container keeps it alive as
//   long as it uses the allocator.
// - Copies compare equal when they use the same mapping (or none). The
//   allocator goes with a container's move assignment and swap; a copied
//   container gets a default one (the heap).
// Not thread-safe (as BulkMemory).
#pragma once

#include <cstddef>
#include <memory>
#include <type_traits>
#include <utility>

#include "core/bulk_memory.h"

namespace tallyd {

template <class T>
class BulkAllocator {
 public:
  using value_type = T;
  using propagate_on_container_move_assignment = std::true_type;
  using propagate_on_container_swap = std::true_type;
  using is_always_equal = std::false_type;

  BulkAllocator() noexcept = default;
  explicit BulkAllocator(std::shared_ptr<BulkMemory> memory) noexcept : memory_(std::move(memory)) {}
  template <class U>
  BulkAllocator(const BulkAllocator<U>& other) noexcept : memory_(other.memory()) {}  // NOLINT: rebinding is implicit

  T* allocate(std::size_t n) {
    if (memory_ && n <= static_cast<std::size_t>(-1) / sizeof(T))
      if (void* p = memory_->take(n * sizeof(T), alignof(T) < 64 ? alignof(T) : 64)) return static_cast<T*>(p);
    return std::allocator<T>().allocate(n);
  }
  void deallocate(T* p, std::size_t n) noexcept {
    if (memory_ && memory_->contains(p)) return;
    std::allocator<T>().deallocate(p, n);
  }

  BulkAllocator select_on_container_copy_construction() const { return BulkAllocator(); }

  const std::shared_ptr<BulkMemory>& memory() const noexcept { return memory_; }

  template <class U>
  bool operator==(const BulkAllocator<U>& other) const noexcept {
    return memory_ == other.memory();
  }

 private:
  std::shared_ptr<BulkMemory> memory_;
};

}  // namespace tallyd
