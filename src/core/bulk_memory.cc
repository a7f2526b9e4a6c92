#include "core/bulk_memory.h"

#include <sys/mman.h>

#include <algorithm>
#include <cstdint>

namespace tallyd {
namespace {

constexpr std::size_t kAlign = 64;
constexpr std::size_t kHugePage = std::size_t{2} << 20;

std::size_t round_up(std::size_t v, std::size_t to) { return (v + to - 1) / to * to; }

}  // namespace

std::shared_ptr<BulkMemory> BulkMemory::create(std::size_t max_bytes) {
  // One huge page more than asked, so that the first piece can start on a
  // huge-page boundary whatever address the kernel picks.
  const std::size_t size = round_up(std::max<std::size_t>(max_bytes, 1), kHugePage) + kHugePage;
  void* p = ::mmap(nullptr, size, PROT_READ | PROT_WRITE, MAP_PRIVATE | MAP_ANONYMOUS | MAP_NORESERVE, -1, 0);
  if (p == MAP_FAILED) return nullptr;
  char* base = static_cast<char*>(p);
  char* aligned = reinterpret_cast<char*>(round_up(reinterpret_cast<std::uintptr_t>(base), kHugePage));
  if (aligned != base) ::munmap(base, static_cast<std::size_t>(aligned - base));
  const std::size_t usable = size - static_cast<std::size_t>(aligned - base);
  ::madvise(aligned, usable, MADV_HUGEPAGE);  // a request; refused is fine
  return std::shared_ptr<BulkMemory>(new BulkMemory(aligned, usable));
}

BulkMemory::~BulkMemory() {
  if (size_ != 0) ::munmap(base_, size_);
}

void* BulkMemory::take(std::size_t bytes) {
  const std::size_t start = round_up(used_, kAlign);
  if (start > size_ || bytes > size_ - start) return nullptr;
  const std::size_t end = start + bytes;
  if (end > populated_) {
    // Prefault in one call rather than page by page on first touch: a
    // chunk ahead for small pieces, just the piece for a large one.
    const std::size_t to = std::min(size_, std::max(round_up(end, kHugePage), populated_ + kChunk));
    ::madvise(base_ + populated_, to - populated_, MADV_POPULATE_WRITE);  // a request; refused is fine
    populated_ = to;
  }
  used_ = end;
  return base_ + start;
}

void BulkMemory::trim() {
  // Prefaulted pages past the last piece go too.
  const std::size_t keep = std::min(size_, round_up(used_, kHugePage));
  if (keep < size_) {
    ::munmap(base_ + keep, size_ - keep);
    size_ = keep;
  }
  used_ = size_;  // nothing more to hand out
  populated_ = std::min(populated_, size_);
}

}  // namespace tallyd
