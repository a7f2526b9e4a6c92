// BulkMemory: one large anonymous mapping, handed out front to back in
// pieces that live as long as the mapping, for state built in bulk (a
// checkpoint's bytes, the history of every restored series).
//
// Why: a restore writes hundreds of MiB of fresh memory, and on virtual
// machines each first touch of a 4 KiB page is a fault costing microseconds
// (~13 us measured on the build machine: 512 MiB touched page by page took
// 1.7 s of CPU). The mapping asks the kernel for transparent huge pages
// (madvise MADV_HUGEPAGE) and prefaults its pages in chunks
// (MADV_POPULATE_WRITE) just ahead of the pieces handed out (the same
// 512 MiB: 0.035 s). Both are requests: where the kernel refuses them
// (older kernels, THP off) the memory is the same, only slower to touch.
//
// Contract:
// - create(max_bytes) reserves address space only (MAP_NORESERVE); nullptr
//   when the mapping fails (callers then use the heap).
// - take(bytes) returns `bytes` zero-initialized bytes aligned to 64, or
//   nullptr once the mapping cannot hold them. Pieces are never freed one
//   by one; all go when the BulkMemory is destroyed (hold a shared_ptr for as
//   long as any piece is used).
// - trim() gives back the memory and address space past what was handed
//   out (rounded up to a 2 MiB huge page), after which take() returns
//   nullptr.
// - used() is the bytes handed out so far, alignment included.
// Not thread-safe.
#pragma once

#include <cstddef>
#include <memory>

namespace tallyd {

class BulkMemory {
 public:
  static std::shared_ptr<BulkMemory> create(std::size_t max_bytes);
  ~BulkMemory();
  BulkMemory(const BulkMemory&) = delete;
  BulkMemory& operator=(const BulkMemory&) = delete;

  void* take(std::size_t bytes);
  void trim();
  std::size_t used() const { return used_; }

  // Bytes prefaulted at least at a time (a multiple of the 2 MiB huge page).
  static constexpr std::size_t kChunk = std::size_t{32} << 20;

 private:
  BulkMemory(char* base, std::size_t size) : base_(base), size_(size) {}
  char* base_;
  std::size_t size_;            // bytes mapped
  std::size_t used_ = 0;        // bytes handed out
  std::size_t populated_ = 0;   // bytes prefaulted
};

}  // namespace tallyd
