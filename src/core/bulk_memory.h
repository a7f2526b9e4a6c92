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
// Prefaulting on a thread of its own: on the build machine's VM fresh
// memory costs ~2 ms per MiB even in huge pages (the host backs the guest's
// pages on first touch after the guest reported them free), about as much
// as decoding a restore's state, and two threads prefault 300 MiB in ~0.6x
// the time of one (docs/benchmarks.md, "Restart, ninth pass"). With
// `prefault_ahead`, a thread keeps the huge pages up to kLead bytes past
// what was handed out prefaulted while the owner fills the pieces; a page
// the thread has not reached yet is faulted in by the owner's first write,
// as without it. The memory and its contents are the same either way.
//
// Contract:
// - create(max_bytes, prefault_ahead) reserves address space only
//   (MAP_NORESERVE); nullptr when the mapping fails (callers then use the
//   heap). With prefault_ahead the prefaulting thread runs until trim() or
//   destruction; when it cannot be started, take() prefaults as without.
// - take(bytes, align) returns `bytes` zero-initialized bytes aligned to
//   `align` (a power of two, at most 64; default 64), or nullptr once the
//   mapping cannot hold them. Pieces are never freed one
//   by one; all go when the BulkMemory is destroyed (hold a shared_ptr for as
//   long as any piece is used).
// - trim() gives back the memory and address space past what was handed
//   out (rounded up to a 2 MiB huge page), after which take() returns
//   nullptr.
// - used() is the bytes handed out so far, alignment included.
// - prefaulting() is true while the prefaulting thread runs.
// Not thread-safe: one thread calls take(), trim() and used() (the
// prefaulting thread is internal and synchronised with them).
#pragma once

#include <atomic>
#include <cstddef>
#include <memory>

namespace tallyd {

class BulkMemory {
 public:
  static std::shared_ptr<BulkMemory> create(std::size_t max_bytes, bool prefault_ahead = false);
  ~BulkMemory();
  BulkMemory(const BulkMemory&) = delete;
  BulkMemory& operator=(const BulkMemory&) = delete;

  void* take(std::size_t bytes, std::size_t align = 64);
  void trim();
  std::size_t used() const { return used_.load(std::memory_order_relaxed); }
  // True when `p` points into the mapping (a piece take() handed out).
  bool contains(const void* p) const {
    const char* c = static_cast<const char*>(p);
    return c >= base_ && c < base_ + size_;
  }
  bool prefaulting() const { return ahead_ != nullptr; }

  // Bytes prefaulted at least at a time by take() (a multiple of the 2 MiB
  // huge page), when no thread prefaults.
  static constexpr std::size_t kChunk = std::size_t{4} << 20;
  // How far past used() the prefaulting thread goes (a multiple of 2 MiB):
  // at most this much is prefaulted and then given back by trim().
  static constexpr std::size_t kLead = std::size_t{16} << 20;

 private:
  BulkMemory(char* base, std::size_t size);
  struct Ahead;  // the prefaulting thread and what wakes it (bulk_memory.cc)
  // Stops and joins the prefaulting thread, if any.
  void stop_prefaulting();
  char* base_;
  std::size_t size_;                  // bytes mapped
  std::atomic<std::size_t> used_{0};  // bytes handed out (read by the prefaulting thread)
  std::size_t populated_ = 0;         // bytes prefaulted by take() (no thread) or by the thread
  std::unique_ptr<Ahead> ahead_;      // null when take() prefaults
};

}  // namespace tallyd
