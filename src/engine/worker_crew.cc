#include "engine/worker_crew.h"

#include <algorithm>
#include <chrono>

namespace tallyd {
namespace {

double seconds_since(std::chrono::steady_clock::time_point t0) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
}

}  // namespace

WorkerCrew::WorkerCrew(int workers)
    : errors_(static_cast<std::size_t>(std::max(workers, 1))), busy_(errors_.size(), 0.0) {
  threads_.reserve(errors_.size() - 1);
  try {
    for (std::size_t w = 1; w < errors_.size(); ++w) threads_.emplace_back([this, w] { worker_loop(w); });
  } catch (...) {
    // The destructor does not run for a half-built object: stop what started.
    {
      std::lock_guard<std::mutex> lock(mutex_);
      stopping_ = true;
    }
    start_.notify_all();
    for (std::thread& t : threads_) t.join();
    throw;
  }
}

WorkerCrew::~WorkerCrew() {
  {
    std::lock_guard<std::mutex> lock(mutex_);
    stopping_ = true;
  }
  start_.notify_all();
  for (std::thread& t : threads_) t.join();
}

void WorkerCrew::run_one(std::size_t worker) {
  const auto t0 = std::chrono::steady_clock::now();
  try {
    (*task_)(worker);
  } catch (...) {
    errors_[worker] = std::current_exception();
  }
  busy_[worker] += seconds_since(t0);
}

void WorkerCrew::worker_loop(std::size_t worker) {
  std::uint64_t seen = 0;
  for (;;) {
    {
      std::unique_lock<std::mutex> lock(mutex_);
      start_.wait(lock, [&] { return stopping_ || round_ != seen; });
      if (stopping_) return;  // only between rounds: the caller is in the destructor
      seen = round_;
    }
    run_one(worker);
    bool last = false;
    {
      std::lock_guard<std::mutex> lock(mutex_);
      last = --unfinished_ == 0;
    }
    if (last) done_.notify_one();
  }
}

void WorkerCrew::run(const std::function<void(std::size_t worker)>& task) {
  const auto t0 = std::chrono::steady_clock::now();
  std::fill(errors_.begin(), errors_.end(), nullptr);
  task_ = &task;
  if (!threads_.empty()) {
    {
      std::lock_guard<std::mutex> lock(mutex_);
      unfinished_ = threads_.size();
      ++round_;
    }
    start_.notify_all();
  }
  run_one(0);
  if (!threads_.empty()) {
    std::unique_lock<std::mutex> lock(mutex_);
    done_.wait(lock, [&] { return unfinished_ == 0; });
  }
  task_ = nullptr;
  round_seconds_ += seconds_since(t0);
  for (const std::exception_ptr& e : errors_)
    if (e) std::rethrow_exception(e);
}

}  // namespace tallyd
