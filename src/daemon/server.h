// Server: the owner of the event loop of `tallyd serve`. Two threads:
// - the event-loop thread (the one that calls run()) runs one
//   asio::io_context holding every source, the status endpoint, the poll,
//   checkpoint and release timers and the signal handlers; it reads and
//   decodes lines and hands them over in batches through a bounded Handoff
//   (daemon/handoff.h), pausing a source when the handoff is full;
// - the judging thread (daemon/judge_thread.h) owns the engine and judges
//   the batches in the order their bytes were read (see docs/service.md).
// The status endpoint answers from the judging thread's last snapshot, so it
// answers while a backlog is being judged.
//
// Start-up: restore the checkpoint (or start fresh when told to), cut the
// alert log back to the checkpointed length, bind every listener, write a
// first checkpoint, then report readiness. Signals:
//   SIGTERM, SIGINT  stop reading, judge what is queued, write a final checkpoint, return
//   SIGHUP           reload the config file (between two batches); a bad one is reported and the running one kept
//   SIGUSR1          reopen the alert logs (after logrotate moved them), then checkpoint
#pragma once

#include <cstdint>
#include <map>
#include <memory>
#include <string>
#include <vector>

#include <asio.hpp>

#include "config/config.h"
#include "core/result.h"
#include "daemon/alert_log.h"
#include "daemon/file_follower.h"
#include "daemon/handoff.h"
#include "daemon/intake.h"
#include "daemon/judge_thread.h"
#include "daemon/socket_sources.h"
#include "daemon/status_http.h"
#include "daemon/warn_limiter.h"

namespace tallyd::daemon {

struct ServeOptions {
  std::string config_path;
  bool fresh = false;       // ignore (set aside) an existing checkpoint instead of refusing to start
  std::string ports_path;   // when set: write "<source name> <port>" lines (and "status <port>") once bound
};

class StdinReader;

class Server {
 public:
  // Loads everything and binds; errors name the file, key or address.
  static Result<std::unique_ptr<Server>> start(const ServeOptions& options);
  ~Server();

  // Runs the loop until SIGTERM/SIGINT; returns the exit code.
  int run();

 private:
  struct FollowGroup {
    SourceConfig config;
    SourceFigures figures;
    std::map<std::string, std::unique_ptr<FileFollower>> files;  // by path
  };

  Server() = default;
  Status restore_state();
  Status open_sources();
  void poll_files();
  void schedule_poll(std::chrono::milliseconds delay);
  void schedule_checkpoint();
  void schedule_release();
  void wait_signals();
  void shutdown();  // stop reading; the judging thread drains the handoff and checkpoints
  void finish();    // the judging thread is done: stop the loop
  HttpReply answer(const std::string& path);
  std::string status_json() const;    // daemon/status_report.cc
  std::string metrics_text() const;   // daemon/status_report.cc
  std::vector<const SourceFigures*> all_figures() const;

  ServeOptions options_;
  ServiceConfig service_;  // the loop's copy: sources, outputs, intake settings (fixed until restart)
  JudgeSetup judge_setup_;  // filled by restore_state, handed to judge_
  std::vector<checkpoint::FileMark> restored_marks_;  // where followed files resume (loop thread)
  ConnectionBudget budget_;
  WarnLimiter warnings_;    // the loop thread's own rate limit (connections over the limit, dropped datagrams)
  std::vector<std::unique_ptr<SourceFigures>> socket_figures_;
  std::chrono::steady_clock::time_point started_ = std::chrono::steady_clock::now();
  bool stopping_ = false;

  // Declared after everything their handlers touch, so they go first.
  std::unique_ptr<asio::io_context> io_;
  std::unique_ptr<Handoff> handoff_;      // after io_: waiting resumes hold sockets of io_
  std::vector<std::unique_ptr<FollowGroup>> follows_;
  std::unique_ptr<JudgeThread> judge_;    // points at handoff_ and at every source's figures
  std::vector<std::unique_ptr<TcpSource>> tcp_;
  std::vector<std::unique_ptr<UdpSource>> udp_;
  std::unique_ptr<StatusHttp> status_;
  std::unique_ptr<asio::steady_timer> poll_timer_, checkpoint_timer_, release_timer_;
  std::unique_ptr<asio::signal_set> signals_;
  std::unique_ptr<asio::posix::stream_descriptor> stdin_;
  std::unique_ptr<StdinReader> stdin_reader_;
};

}  // namespace tallyd::daemon
