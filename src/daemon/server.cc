#include "daemon/server.h"

#include <glob.h>
#include <unistd.h>

#include <filesystem>
#include <fstream>

#include <fmt/format.h>
#include <spdlog/spdlog.h>

#include "checkpoint/checkpoint.h"
#include "daemon/readiness.h"

namespace tallyd::daemon {
namespace {

// Bytes one followed file may read per poll: one batch (about 2,000 records)
// before the loop turns to the next file and to other work; the poll comes
// back at once while more waits and the handoff has room.
constexpr std::size_t kPollBudgetBytes = 64 << 10;

// Lines read and not yet judged beyond which sources pause (daemon/handoff.h):
// enough for the judging thread never to wait for the loop during a backlog,
// small enough that a graceful stop judges them in seconds and they hold a
// few MiB at most.
constexpr std::size_t kQueueLines = 4096;

std::vector<std::string> expand(const std::string& pattern) {
  glob_t g{};
  std::vector<std::string> out;
  if (::glob(pattern.c_str(), GLOB_NOSORT, nullptr, &g) == 0)
    for (std::size_t i = 0; i < g.gl_pathc; ++i) out.emplace_back(g.gl_pathv[i]);
  ::globfree(&g);
  // A plain path that does not exist yet is still followed (it may appear later).
  if (out.empty() && pattern.find_first_of("*?[") == std::string::npos) out.push_back(pattern);
  return out;
}

}  // namespace

// Standard input as a source: read as a stream, like a TCP connection
// (and, like it, paused while the handoff is full).
class StdinReader {
 public:
  StdinReader(asio::posix::stream_descriptor& fd, std::size_t max_line_bytes, Handoff& handoff, SourceFigures& figures)
      : fd_(&fd), max_line_bytes_(max_line_bytes), splitter_(max_line_bytes), decoder_("stdin", std::nullopt),
        handoff_(&handoff), figures_(&figures), buffer_(64 * 1024) {}
  void read() {
    fd_->async_read_some(asio::buffer(buffer_), [this](std::error_code ec, std::size_t n) {
      if (ec == asio::error::operation_aborted || !fd_->is_open()) return;
      const bool end = static_cast<bool>(ec);
      LineBatch batch;
      batch.figures = figures_;
      batch.arrival = std::chrono::steady_clock::now();
      if (!end) splitter_.push(std::string_view(buffer_.data(), n));
      for (Split s = end ? splitter_.finish() : splitter_.next(); s.kind != SplitKind::need_more;
           s = end ? splitter_.finish() : splitter_.next())
        batch.lines.push_back(decoder_.decode(s, max_line_bytes_));
      if (!batch.lines.empty()) handoff_->push(std::move(batch));
      if (end) {
        spdlog::info("stdin: end of input");
        return;
      }
      if (handoff_->has_room()) read();
      else handoff_->when_room([this] { if (fd_->is_open()) read(); });
    });
  }

 private:
  asio::posix::stream_descriptor* fd_;
  std::size_t max_line_bytes_;
  LineSplitter splitter_;
  LineDecoder decoder_;
  Handoff* handoff_;
  SourceFigures* figures_;
  std::vector<char> buffer_;
};

Server::~Server() = default;

Result<std::unique_ptr<Server>> Server::start(const ServeOptions& options) {
  std::unique_ptr<Server> s(new Server());
  s->options_ = options;
  auto loaded = load_config(options.config_path);
  if (!loaded) return loaded.error();
  s->judge_setup_.config_path = options.config_path;
  s->judge_setup_.config = std::make_unique<MonitorConfig>(std::move(loaded).value());
  s->service_ = s->judge_setup_.config->service;
  if (s->service_.sources.empty())
    return Error{fmt::format("{}: no [[source]] table: nothing to serve", options.config_path)};
  if (Status st = s->restore_state(); !st) return st.error();
  s->io_ = std::make_unique<asio::io_context>(1);
  s->handoff_ = std::make_unique<Handoff>(*s->io_, kQueueLines);
  // Signals are caught from here on (before the ports file tells anyone we are up).
  s->signals_ = std::make_unique<asio::signal_set>(*s->io_, SIGTERM, SIGINT, SIGHUP);
  s->signals_->add(SIGUSR1);
  s->poll_timer_ = std::make_unique<asio::steady_timer>(*s->io_);
  s->checkpoint_timer_ = std::make_unique<asio::steady_timer>(*s->io_);
  s->release_timer_ = std::make_unique<asio::steady_timer>(*s->io_);
  if (Status st = s->open_sources(); !st) return st.error();
  s->judge_setup_.sources = s->all_figures();
  Server* self = s.get();
  s->judge_ = std::make_unique<JudgeThread>(std::move(s->judge_setup_), *s->handoff_,
                                            [self] { asio::post(*self->io_, [self] { self->finish(); }); });
  // A checkpoint before reading anything: from now on a restart always finds
  // one that matches the alert log.
  if (Status st = s->judge_->write_checkpoint_now(); !st) return st.error();
  return s;
}

Status Server::restore_state() {
  const ServiceConfig& sc = service_;
  JudgeSetup& js = judge_setup_;
  auto log = AlertLog::open(sc.alerts_path, sc.text_path);
  if (!log) return log.error();
  js.log = std::move(log).value();

  std::unique_ptr<Engine> engine;
  if (options_.fresh && std::filesystem::exists(sc.checkpoint_path)) {
    const std::string aside = sc.checkpoint_path + ".set-aside";
    std::error_code ec;
    std::filesystem::rename(sc.checkpoint_path, aside, ec);
    if (ec) return Error{fmt::format("{}: cannot set the checkpoint aside: {}", sc.checkpoint_path, ec.message())};
    spdlog::warn("--fresh: the checkpoint was moved to {}; starting with no series history", aside);
  } else {
    auto restored = checkpoint::read_file(sc.checkpoint_path, js.config->settings, js.config->limits, js.config->fdr);
    if (!restored)
      return Error{restored.error().message +
                   "\n(to start with no history instead, run again with --fresh; the checkpoint is then set aside)"};
    if (*restored) {
      checkpoint::Restored& r = **restored;
      if (Status st = js.log->truncate_to(r.marks.alert_log_bytes); !st)
        return Error{st.error().message + " (was it rotated or edited while tallyd was stopped?)"};
      engine = std::move(r.engine);
      js.marks = std::move(r.marks.files);
      restored_marks_ = js.marks;  // the loop's copy: where followers resume
      js.last_checkpoint_unix = r.marks.written_unix;
      spdlog::info("restored {} series from {}; alert log cut back to {} bytes", engine->series_count(),
                   sc.checkpoint_path, r.marks.alert_log_bytes);
    }
  }
  if (!engine) engine = std::make_unique<Engine>(js.config->settings, js.config->limits, js.config->fdr);
  js.intake = std::make_unique<Intake>(std::move(engine), *js.log, started_);
  return Ok{};
}

Status Server::open_sources() {
  const ServiceConfig& sc = service_;
  budget_.max = sc.max_connections;
  std::string ports;
  try {
    for (const SourceConfig& src : sc.sources) {
      auto figures = std::make_unique<SourceFigures>();
      figures->name = src.name;
      switch (src.kind) {
        case SourceKind::follow: {
          auto g = std::make_unique<FollowGroup>();
          g->config = src;
          g->figures.name = src.name;
          g->figures.kind = "follow";
          follows_.push_back(std::move(g));
          break;
        }
        case SourceKind::tcp:
          figures->kind = "tcp";
          tcp_.push_back(
              std::make_unique<TcpSource>(*io_, src, sc.max_line_bytes, *handoff_, *figures, budget_, warnings_));
          ports += fmt::format("{} {}\n", src.name, tcp_.back()->port());
          spdlog::info("{}: listening on tcp {}:{}", src.name, src.address, tcp_.back()->port());
          socket_figures_.push_back(std::move(figures));
          break;
        case SourceKind::udp:
          figures->kind = "udp";
          udp_.push_back(std::make_unique<UdpSource>(*io_, src, sc.max_datagram_bytes, *handoff_, *figures, warnings_));
          ports += fmt::format("{} {}\n", src.name, udp_.back()->port());
          spdlog::info("{}: listening on udp {}:{}", src.name, src.address, udp_.back()->port());
          socket_figures_.push_back(std::move(figures));
          break;
        case SourceKind::stdin_: {
          figures->kind = "stdin";
          stdin_ = std::make_unique<asio::posix::stream_descriptor>(*io_, ::dup(STDIN_FILENO));
          stdin_reader_ = std::make_unique<StdinReader>(*stdin_, sc.max_line_bytes, *handoff_, *figures);
          socket_figures_.push_back(std::move(figures));
          break;
        }
      }
    }
    if (sc.status_enabled) {
      status_ = std::make_unique<StatusHttp>(*io_, sc.status_address, sc.status_port,
                                             [this](const std::string& path) { return answer(path); });
      ports += fmt::format("status {}\n", status_->port());
      spdlog::info("status: http://{}:{}/", sc.status_address, status_->port());
    }
  } catch (const std::exception& e) {
    return Error{fmt::format("{}: cannot open a source: {}", options_.config_path, e.what())};
  }
  if (!options_.ports_path.empty()) {
    const std::string tmp = options_.ports_path + ".tmp";
    std::ofstream(tmp) << ports;
    std::filesystem::rename(tmp, options_.ports_path);
  }
  return Ok{};
}

void Server::poll_files() {
  if (stopping_) return;
  if (service_.wall_clock) judge_->request_tick(std::chrono::time_point_cast<Seconds>(std::chrono::system_clock::now()));
  bool more = false, full = false;
  for (auto& g : follows_) {
    for (const std::string& path : expand(g->config.path)) {
      if (g->files.count(path)) continue;
      auto f = std::make_unique<FileFollower>(path, service_.max_line_bytes, g->figures);
      for (const checkpoint::FileMark& m : restored_marks_)
        if (m.path == path) f->resume_from(m);
      g->files.emplace(path, std::move(f));
    }
    for (auto& [path, f] : g->files) {
      // A full handoff: stop reading; each file keeps its offset and waits.
      if (!handoff_->has_room()) {
        full = true;
        break;
      }
      LineBatch batch;
      more |= f->poll(batch, kPollBudgetBytes);
      if (batch.mark) handoff_->push(std::move(batch));
    }
    if (full) break;
  }
  if (full) {
    handoff_->when_room([this] { poll_files(); });
    return;
  }
  schedule_poll(more ? std::chrono::milliseconds(0) : std::chrono::milliseconds(service_.poll_ms));
}

void Server::schedule_poll(std::chrono::milliseconds delay) {
  poll_timer_->expires_after(delay);
  poll_timer_->async_wait([this](std::error_code ec) {
    if (!ec) poll_files();
  });
}

void Server::schedule_checkpoint() {
  checkpoint_timer_->expires_after(service_.checkpoint_every);
  checkpoint_timer_->async_wait([this](std::error_code ec) {
    if (ec || stopping_) return;
    judge_->request_checkpoint();
    schedule_checkpoint();
  });
}

void Server::schedule_release() {
  // Checked once a second (release_idle is at least 1s); cheap when [fdr] is
  // off or no step is open. [fdr] can be turned on by a reload, so always armed.
  release_timer_->expires_after(std::chrono::seconds(1));
  release_timer_->async_wait([this](std::error_code ec) {
    if (ec || stopping_) return;
    judge_->request_release();
    schedule_release();
  });
}

void Server::wait_signals() {
  signals_->async_wait([this](std::error_code ec, int signo) {
    if (ec) return;
    if (signo == SIGHUP) {
      judge_->request_reload();
    } else if (signo == SIGUSR1) {
      judge_->request_reopen();
    } else if (!stopping_) {
      spdlog::info("signal {}: stopping; judging the {} lines already read, then a last checkpoint", signo,
                   handoff_->queued_lines());
      shutdown();
    }
    wait_signals();
  });
}

void Server::shutdown() {
  stopping_ = true;
  notify_stopping();
  for (auto& t : tcp_) t->stop();
  for (auto& u : udp_) u->stop();
  if (stdin_) {
    std::error_code ec;
    stdin_->close(ec);
  }
  poll_timer_->cancel();
  checkpoint_timer_->cancel();
  release_timer_->cancel();
  // The judging thread drains what is queued, checkpoints, then calls finish().
  handoff_->close();
}

void Server::finish() {
  if (!stopping_) shutdown();  // the judging thread stopped on its own (an unexpected error)
  if (status_) status_->stop();
  signals_->cancel();
  io_->stop();
}

int Server::run() {
  judge_->start();
  wait_signals();
  if (stdin_reader_) stdin_reader_->read();
  poll_files();
  schedule_checkpoint();
  schedule_release();
  notify_ready();
  spdlog::info("serving: {} source(s), alerts to {}", service_.sources.size(), service_.alerts_path);
  io_->run();
  judge_->join();
  spdlog::info("stopped; {} series, checkpoint {}", judge_->snapshot().series, service_.checkpoint_path);
  return judge_->failed() ? 2 : 0;
}

HttpReply Server::answer(const std::string& path) {
  if (path == "/alive") return {200, "text/plain; charset=utf-8", "alive\n"};
  if (path == "/state") return {200, "application/json", status_json()};
  if (path == "/metrics")
    return {200, "application/openmetrics-text; version=1.0.0; charset=utf-8", metrics_text()};
  return {404, "text/plain; charset=utf-8", "not found: try /alive, /state or /metrics\n"};
}

std::vector<const SourceFigures*> Server::all_figures() const {
  std::vector<const SourceFigures*> out;
  for (const auto& g : follows_) out.push_back(&g->figures);
  for (const auto& f : socket_figures_) out.push_back(f.get());
  return out;
}

}  // namespace tallyd::daemon
