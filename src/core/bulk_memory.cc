#include "core/bulk_memory.h"

#include <sys/mman.h>

#include <algorithm>
#include <condition_variable>
#include <cstdint>
#include <mutex>
#include <system_error>
#include <thread>

namespace tallyd {
namespace {

constexpr std::size_t kHugePage = std::size_t{2} << 20;

std::size_t round_up(std::size_t v, std::size_t to) { return (v + to - 1) / to * to; }

}  // namespace

struct BulkMemory::Ahead {
  std::mutex mutex;
  std::condition_variable wake;
  bool stop = false;  // under mutex
  std::thread thread;
};

BulkMemory::BulkMemory(char* base, std::size_t size) : base_(base), size_(size) {}

std::shared_ptr<BulkMemory> BulkMemory::create(std::size_t max_bytes, bool prefault_ahead) {
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
  std::shared_ptr<BulkMemory> memory(new BulkMemory(aligned, usable));
  if (!prefault_ahead) return memory;
  auto ahead = std::make_unique<Ahead>();
  BulkMemory* self = memory.get();
  try {
    // The thread goes no further than kLead past what take() handed out,
    // and from the huge page after the one take() is in: the pages before
    // it the owner has written (faulting them in itself when the thread
    // was behind), and on its own page they would only race.
    ahead->thread = std::thread([self, state = ahead.get()] {
      std::size_t done = 0;
      for (;;) {
        std::size_t used = 0;
        {
          std::unique_lock<std::mutex> lock(state->mutex);
          state->wake.wait(lock, [&] {
            used = self->used_.load(std::memory_order_acquire);
            return state->stop || done < std::min(self->size_, round_up(used, kHugePage) + kLead);
          });
          if (state->stop) break;
        }
        const std::size_t from = std::max(done, round_up(used + 1, kHugePage));
        if (from >= self->size_) break;
        ::madvise(self->base_ + from, kHugePage, MADV_POPULATE_WRITE);  // a request; refused is fine
        done = from + kHugePage;
      }
      std::lock_guard<std::mutex> lock(state->mutex);
      self->populated_ = std::min(done, self->size_);
    });
  } catch (const std::system_error&) {
    return memory;  // no thread: take() prefaults
  }
  memory->ahead_ = std::move(ahead);
  return memory;
}

BulkMemory::~BulkMemory() {
  stop_prefaulting();
  if (size_ != 0) ::munmap(base_, size_);
}

void BulkMemory::stop_prefaulting() {
  if (!ahead_) return;
  {
    std::lock_guard<std::mutex> lock(ahead_->mutex);
    ahead_->stop = true;
  }
  ahead_->wake.notify_one();
  ahead_->thread.join();
  ahead_.reset();
}

void* BulkMemory::take(std::size_t bytes, std::size_t align) {
  const std::size_t used = used_.load(std::memory_order_relaxed);
  const std::size_t start = round_up(used, std::clamp<std::size_t>(align, 1, 64));
  if (start > size_ || bytes > size_ - start) return nullptr;
  const std::size_t end = start + bytes;
  if (ahead_) {
    used_.store(end, std::memory_order_release);
    // The thread waits for take() to move into another huge page.
    if (end / kHugePage != used / kHugePage) {
      { std::lock_guard<std::mutex> lock(ahead_->mutex); }
      ahead_->wake.notify_one();
    }
    return base_ + start;
  }
  if (end > populated_) {
    // Prefault in one call rather than page by page on first touch: a
    // chunk ahead for small pieces, just the piece for a large one.
    const std::size_t to = std::min(size_, std::max(round_up(end, kHugePage), populated_ + kChunk));
    ::madvise(base_ + populated_, to - populated_, MADV_POPULATE_WRITE);  // a request; refused is fine
    populated_ = to;
  }
  used_.store(end, std::memory_order_relaxed);
  return base_ + start;
}

void BulkMemory::trim() {
  stop_prefaulting();
  // Prefaulted pages past the last piece go too.
  const std::size_t used = used_.load(std::memory_order_relaxed);
  const std::size_t keep = std::min(size_, round_up(used, kHugePage));
  if (keep < size_) {
    ::munmap(base_ + keep, size_ - keep);
    size_ = keep;
  }
  used_.store(size_, std::memory_order_relaxed);  // nothing more to hand out
  populated_ = std::min(populated_, size_);
}

}  // namespace tallyd
