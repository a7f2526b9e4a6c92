// JudgeThread: the thread of `tallyd serve` that owns the engine and all that
// changes it or must agree with it: the Intake (engine, alert log, latency,
// last alerts), the marks of what has been judged in each followed file, the
// checkpoint, config reloads, alert-log reopening, the wall-clock tick and
// the [fdr] step release. The event-loop thread (daemon/server.h) keeps all
// IO and talks to it only through the Handoff and snapshot().
//
// Threads
// - Construction and write_checkpoint() before start(): the starting thread.
// - start() .. join(): the judging thread runs the Handoff's jobs in order. A
//   batch is judged line by line (Intake::offer); then, if it came from a
//   followed file, its mark becomes that file's judged mark. A request_* is a
//   task run between batches, after everything queued before it.
// - When the handoff is closed and drained (a graceful stop), the thread
//   writes the final checkpoint, publishes a last snapshot, calls
//   `on_finished` (from the judging thread: it must only post, e.g. to the
//   loop) and ends.
// - request_*(): the loop thread. snapshot(): any thread.
//
// Checkpoints are written on the judging thread between batches, so the
// alert-log length and the file offsets they record are exactly those of the
// records judged so far, never of lines only read.
#pragma once

#include <cstdint>
#include <deque>
#include <functional>
#include <map>
#include <memory>
#include <mutex>
#include <optional>
#include <string>
#include <thread>
#include <vector>

#include "checkpoint/checkpoint.h"
#include "config/config.h"
#include "daemon/alert_log.h"
#include "daemon/handoff.h"
#include "daemon/intake.h"

namespace tallyd::daemon {

// What the status endpoint shows of the judging side, taken between two
// batches (so every figure in it belongs to the same moment).
struct JudgedFigures {
  EngineCounters counters;
  std::size_t series = 0;
  std::size_t held = 0;
  std::size_t silent_now = 0;
  std::size_t episodes_open = 0;
  std::uint64_t episodes_opened = 0;
  std::uint64_t episodes_closed = 0;
  bool fdr_enabled = false;
  std::optional<std::int64_t> fdr_open_step;
  std::size_t fdr_waiting = 0;
  std::uint64_t fdr_steps_released = 0;
  std::string alert_log_path;
  std::uint64_t alert_log_bytes = 0;
  std::uint64_t checkpoints_written = 0;
  std::uint64_t checkpoint_failures = 0;
  std::int64_t last_checkpoint_unix = 0;
  std::uint64_t reloads_applied = 0;
  std::uint64_t reloads_refused = 0;
  LatencyHistogram latency;
  std::deque<std::string> last_alerts;  // JSON lines, newest last
  // records and rejected of each source, in the order of JudgeSetup::sources.
  std::vector<std::pair<std::uint64_t, std::uint64_t>> sources;
  std::map<std::string, std::uint64_t> judged_bytes;  // followed file path -> bytes judged
};

// Everything the judging thread takes over at start-up.
struct JudgeSetup {
  std::string config_path;                   // read again on reload
  std::unique_ptr<MonitorConfig> config;     // the engine's settings live here
  std::unique_ptr<AlertLog> log;
  std::unique_ptr<Intake> intake;            // its engine points into `config`; writes to `log`
  std::vector<checkpoint::FileMark> marks;   // restored from the checkpoint (files not read again yet)
  std::int64_t last_checkpoint_unix = 0;
  std::vector<const SourceFigures*> sources;  // every source, in the order JudgedFigures::sources lists them
};

class JudgeThread {
 public:
  JudgeThread(JudgeSetup setup, Handoff& handoff, std::function<void()> on_finished);
  ~JudgeThread();  // joins the thread if it still runs (after close() on the handoff)
  JudgeThread(const JudgeThread&) = delete;
  JudgeThread& operator=(const JudgeThread&) = delete;

  // The start-up checkpoint, before start(); errors name the path.
  Status write_checkpoint_now();
  void start();
  void join();

  // Loop thread: tasks behind what is already queued.
  void request_checkpoint();
  void request_reload();     // re-read the config file (model tables only; see docs/service.md)
  void request_reopen();     // reopen the alert logs, then checkpoint
  void request_tick(TimePoint wall_now);  // [intake] clock = "wall"
  void request_release();    // [fdr]: release the open step if daemon/step_release.h says so and nothing is queued

  JudgedFigures snapshot() const;
  // After join(): the thread stopped on an unexpected error, or no checkpoint could be written at all.
  bool failed() const { return failed_ || (checkpoints_written_ == 0 && checkpoint_failures_ > 0); }

 private:
  void run();
  void judge(LineBatch& batch);
  Status write_checkpoint();
  void reload();
  void reopen();
  void publish(bool force);

  JudgeSetup s_;
  Handoff* handoff_;
  std::function<void()> on_finished_;
  std::map<std::string, checkpoint::FileMark> judged_marks_;  // by path; judging thread only
  std::uint64_t checkpoints_written_ = 0, checkpoint_failures_ = 0;
  std::uint64_t reloads_ = 0, reload_failures_ = 0;
  bool failed_ = false;
  std::chrono::steady_clock::time_point published_at_{};

  mutable std::mutex published_mutex_;
  JudgedFigures published_;  // guarded by published_mutex_

  std::thread thread_;
};

}  // namespace tallyd::daemon
