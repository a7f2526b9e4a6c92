// A fixed crew of worker threads that run one task per worker, round after
// round, for the crew's whole lifetime (ShardedEngine's threads).
//
// Worker 0 is the thread that calls run(); workers 1..n-1 are threads
// started by the constructor and joined by the destructor. Each round, every
// worker runs task(worker) once; run() returns when all have finished, so
// between rounds no worker touches anything the task reaches, and everything
// a worker wrote during the round is visible to the caller after run()
// returns (the handoff goes through a mutex).
//
// Why not a thread per round: each round then pays a clone and, when the
// thread ends, a release of its stack (an madvise), and the new thread
// starts with an empty malloc cache (docs/benchmarks.md, "Threads,
// fourth pass": libc's share of the samples rose from 7.5% to 9.1%).
//
// A task that throws does not end the program: the exception is caught on
// its worker, the round still waits for every other worker, and run() then
// rethrows the exception of the lowest-numbered worker that threw. The crew
// stays usable for later rounds.
//
// Not thread-safe: one caller of run() at a time, and run() must not be
// called from inside a task.
#pragma once

#include <condition_variable>
#include <cstddef>
#include <cstdint>
#include <exception>
#include <functional>
#include <mutex>
#include <thread>
#include <vector>

namespace tallyd {

class WorkerCrew {
 public:
  // Starts workers - 1 threads; workers is clamped to at least 1. If a
  // thread cannot be started, the ones already started are stopped and
  // joined and std::system_error propagates.
  explicit WorkerCrew(int workers);
  // Stops and joins the threads (they are idle: no round is running).
  ~WorkerCrew();
  WorkerCrew(const WorkerCrew&) = delete;
  WorkerCrew& operator=(const WorkerCrew&) = delete;

  int size() const { return static_cast<int>(errors_.size()); }

  // Runs task(w) for every worker w in [0, size()), w = 0 on the calling
  // thread, and returns when all have returned. See the file comment for
  // exceptions.
  void run(const std::function<void(std::size_t worker)>& task);

  // Seconds each worker spent inside tasks, and the seconds run() took,
  // summed over all rounds so far: sum(round) * size() - sum(busy) is the
  // time workers waited for the slowest worker of a round (or for a core).
  const std::vector<double>& busy_seconds() const { return busy_; }
  double round_seconds() const { return round_seconds_; }

 private:
  void worker_loop(std::size_t worker);
  void run_one(std::size_t worker);

  std::mutex mutex_;
  std::condition_variable start_;  // workers wait here for a new round or stop
  std::condition_variable done_;   // the caller waits here for the round to finish
  std::uint64_t round_ = 0;        // bumped once per round, under mutex_
  std::size_t unfinished_ = 0;     // workers 1..n-1 still in the current round
  bool stopping_ = false;
  const std::function<void(std::size_t)>* task_ = nullptr;  // the current round's task
  std::vector<std::exception_ptr> errors_;  // per worker, for the current round
  std::vector<double> busy_;                // per worker, all rounds
  double round_seconds_ = 0;
  std::vector<std::thread> threads_;  // workers 1..n-1; last member: started after the rest exist
};

}  // namespace tallyd
