// Server: the owner of the event loop of `tallyd serve`. One thread runs one
// asio::io_context holding every source, the status endpoint, the poll and
// checkpoint timers and the signal handlers; records are judged on that same
// thread, in the order their bytes were read (see docs/service.md for why).
//
// Start-up: restore the checkpoint (or start fresh when told to), cut the
// alert log back to the checkpointed length, write a first checkpoint, bind
// every listener, then report readiness. Signals:
//   SIGTERM, SIGINT  stop reading, write a final checkpoint, return
//   SIGHUP           reload the config file; a bad one is reported and the running one kept
//   SIGUSR1          reopen the alert logs (after logrotate moved them)
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
#include "daemon/intake.h"
#include "daemon/socket_sources.h"
#include "daemon/status_http.h"

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
  Status write_checkpoint();
  void wait_signals();
  void reload();
  void reopen_logs();
  void shutdown();
  HttpReply answer(const std::string& path);
  std::string status_json() const;    // daemon/status_report.cc
  std::string metrics_text() const;   // daemon/status_report.cc
  std::vector<const SourceFigures*> all_figures() const;

  ServeOptions options_;
  std::unique_ptr<MonitorConfig> config_;
  std::unique_ptr<AlertLog> alert_log_;
  std::unique_ptr<Intake> intake_;
  std::vector<checkpoint::FileMark> restored_marks_;
  ConnectionBudget budget_;
  std::vector<std::unique_ptr<SourceFigures>> socket_figures_;
  std::chrono::steady_clock::time_point started_ = std::chrono::steady_clock::now();
  std::int64_t last_checkpoint_unix_ = 0;
  std::uint64_t checkpoints_written_ = 0;
  std::uint64_t checkpoint_failures_ = 0;
  std::uint64_t reloads_ = 0, reload_failures_ = 0;
  bool stopping_ = false;

  // Declared after everything their handlers touch, so they go first.
  std::unique_ptr<asio::io_context> io_;
  std::vector<std::unique_ptr<FollowGroup>> follows_;
  std::vector<std::unique_ptr<TcpSource>> tcp_;
  std::vector<std::unique_ptr<UdpSource>> udp_;
  std::unique_ptr<StatusHttp> status_;
  std::unique_ptr<asio::steady_timer> poll_timer_, checkpoint_timer_, release_timer_;
  std::unique_ptr<asio::signal_set> signals_;
  std::unique_ptr<asio::posix::stream_descriptor> stdin_;
  std::unique_ptr<StdinReader> stdin_reader_;
};

}  // namespace tallyd::daemon
