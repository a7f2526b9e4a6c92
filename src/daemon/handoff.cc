#include "daemon/handoff.h"

#include <algorithm>

namespace tallyd::daemon {

Handoff::Handoff(asio::io_context& loop, std::size_t capacity) : loop_(&loop), capacity_(std::max<std::size_t>(capacity, 2)) {}

bool Handoff::has_room() const {
  std::lock_guard lock(mutex_);
  return queued_ < capacity_;
}

std::size_t Handoff::queued_lines() const {
  std::lock_guard lock(mutex_);
  return queued_;
}

void Handoff::push(LineBatch batch) {
  {
    std::lock_guard lock(mutex_);
    if (closed_) return;
    queued_ += batch.lines.size();
    jobs_.emplace_back(std::move(batch));
  }
  ready_.notify_one();
}

void Handoff::post(HandoffTask task) {
  {
    std::lock_guard lock(mutex_);
    if (closed_) return;
    jobs_.emplace_back(std::move(task));
  }
  ready_.notify_one();
}

void Handoff::when_room(std::function<void()> resume) {
  {
    std::lock_guard lock(mutex_);
    if (closed_) return;
    if (queued_ >= capacity_) {
      waiting_.push_back(std::move(resume));
      return;
    }
  }
  // Posted, not called: the caller may be in the middle of its own read handler.
  asio::post(*loop_, std::move(resume));
}

void Handoff::close() {
  std::vector<std::function<void()>> dropped;
  {
    std::lock_guard lock(mutex_);
    closed_ = true;
    dropped.swap(waiting_);
  }
  ready_.notify_all();
  // `dropped` (and what its resumes hold, e.g. a connection) goes here, on the loop thread.
}

std::optional<HandoffJob> Handoff::pop() {
  std::unique_lock lock(mutex_);
  ready_.wait(lock, [this] { return closed_ || !jobs_.empty(); });
  if (jobs_.empty()) return std::nullopt;
  HandoffJob job = std::move(jobs_.front());
  jobs_.pop_front();
  return job;
}

void Handoff::done(std::size_t lines) {
  std::vector<std::function<void()>> wake;
  {
    std::lock_guard lock(mutex_);
    queued_ -= std::min(lines, queued_);
    if (queued_ < capacity_ / 2) wake.swap(waiting_);
  }
  for (auto& resume : wake) asio::post(*loop_, std::move(resume));
}

}  // namespace tallyd::daemon
