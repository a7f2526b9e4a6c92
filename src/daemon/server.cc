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

// Bytes one followed file may hand out per poll before the loop turns to
// other work (sockets, status); the poll comes back at once while more waits.
// 64 KiB is about 2,000 records: on a loaded 2-core machine that is a couple
// of seconds of judging, so a status request waits no longer than that
// while a large backlog is read (1 MiB held it for 20 s in the crash test).
constexpr std::size_t kPollBudgetBytes = 64 << 10;

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

std::int64_t unix_now() {
  return std::chrono::duration_cast<std::chrono::seconds>(std::chrono::system_clock::now().time_since_epoch()).count();
}

}  // namespace

// Standard input as a source: read as a stream, like a TCP connection.
class StdinReader {
 public:
  StdinReader(asio::posix::stream_descriptor& fd, std::size_t max_line_bytes, Intake& intake, SourceFigures& figures)
      : fd_(&fd), max_line_bytes_(max_line_bytes), splitter_(max_line_bytes), decoder_("stdin", std::nullopt),
        intake_(&intake), figures_(&figures), buffer_(64 * 1024) {}
  void read() {
    fd_->async_read_some(asio::buffer(buffer_), [this](std::error_code ec, std::size_t n) {
      if (ec == asio::error::operation_aborted) return;
      const SteadyTime arrival = std::chrono::steady_clock::now();
      const bool end = static_cast<bool>(ec);
      if (!end) splitter_.push(std::string_view(buffer_.data(), n));
      for (Split s = end ? splitter_.finish() : splitter_.next(); s.kind != SplitKind::need_more;
           s = end ? splitter_.finish() : splitter_.next()) {
        ParseOutcome o = decoder_.decode(s, max_line_bytes_);
        intake_->offer(o, *figures_, arrival);
      }
      if (end) {
        spdlog::info("stdin: end of input");
        return;
      }
      read();
    });
  }

 private:
  asio::posix::stream_descriptor* fd_;
  std::size_t max_line_bytes_;
  LineSplitter splitter_;
  LineDecoder decoder_;
  Intake* intake_;
  SourceFigures* figures_;
  std::vector<char> buffer_;
};

Server::~Server() = default;

Result<std::unique_ptr<Server>> Server::start(const ServeOptions& options) {
  std::unique_ptr<Server> s(new Server());
  s->options_ = options;
  auto loaded = load_config(options.config_path);
  if (!loaded) return loaded.error();
  s->config_ = std::make_unique<MonitorConfig>(std::move(loaded).value());
  if (s->config_->service.sources.empty())
    return Error{fmt::format("{}: no [[source]] table: nothing to serve", options.config_path)};
  if (Status st = s->restore_state(); !st) return st.error();
  s->io_ = std::make_unique<asio::io_context>(1);
  // Signals are caught from here on (before the ports file tells anyone we are up).
  s->signals_ = std::make_unique<asio::signal_set>(*s->io_, SIGTERM, SIGINT, SIGHUP);
  s->signals_->add(SIGUSR1);
  s->poll_timer_ = std::make_unique<asio::steady_timer>(*s->io_);
  s->checkpoint_timer_ = std::make_unique<asio::steady_timer>(*s->io_);
  s->release_timer_ = std::make_unique<asio::steady_timer>(*s->io_);
  if (Status st = s->open_sources(); !st) return st.error();
  // A checkpoint before reading anything: from now on a restart always finds
  // one that matches the alert log.
  if (Status st = s->write_checkpoint(); !st) return st.error();
  return s;
}

Status Server::restore_state() {
  const ServiceConfig& sc = config_->service;
  auto log = AlertLog::open(sc.alerts_path, sc.text_path);
  if (!log) return log.error();
  alert_log_ = std::move(log).value();

  std::unique_ptr<Engine> engine;
  if (options_.fresh && std::filesystem::exists(sc.checkpoint_path)) {
    const std::string aside = sc.checkpoint_path + ".set-aside";
    std::error_code ec;
    std::filesystem::rename(sc.checkpoint_path, aside, ec);
    if (ec) return Error{fmt::format("{}: cannot set the checkpoint aside: {}", sc.checkpoint_path, ec.message())};
    spdlog::warn("--fresh: the checkpoint was moved to {}; starting with no series history", aside);
  } else {
    auto restored = checkpoint::read_file(sc.checkpoint_path, config_->settings, config_->limits, config_->fdr);
    if (!restored)
      return Error{restored.error().message +
                   "\n(to start with no history instead, run again with --fresh; the checkpoint is then set aside)"};
    if (*restored) {
      checkpoint::Restored& r = **restored;
      if (Status st = alert_log_->truncate_to(r.marks.alert_log_bytes); !st)
        return Error{st.error().message + " (was it rotated or edited while tallyd was stopped?)"};
      engine = std::move(r.engine);
      restored_marks_ = std::move(r.marks.files);
      last_checkpoint_unix_ = r.marks.written_unix;
      spdlog::info("restored {} series from {}; alert log cut back to {} bytes", engine->series_count(),
                   sc.checkpoint_path, r.marks.alert_log_bytes);
    }
  }
  if (!engine) engine = std::make_unique<Engine>(config_->settings, config_->limits, config_->fdr);
  intake_ = std::make_unique<Intake>(std::move(engine), *alert_log_, started_);
  return Ok{};
}

Status Server::open_sources() {
  const ServiceConfig& sc = config_->service;
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
          tcp_.push_back(std::make_unique<TcpSource>(*io_, src, sc.max_line_bytes, *intake_, *figures, budget_));
          ports += fmt::format("{} {}\n", src.name, tcp_.back()->port());
          spdlog::info("{}: listening on tcp {}:{}", src.name, src.address, tcp_.back()->port());
          socket_figures_.push_back(std::move(figures));
          break;
        case SourceKind::udp:
          figures->kind = "udp";
          udp_.push_back(std::make_unique<UdpSource>(*io_, src, sc.max_datagram_bytes, *intake_, *figures));
          ports += fmt::format("{} {}\n", src.name, udp_.back()->port());
          spdlog::info("{}: listening on udp {}:{}", src.name, src.address, udp_.back()->port());
          socket_figures_.push_back(std::move(figures));
          break;
        case SourceKind::stdin_: {
          figures->kind = "stdin";
          stdin_ = std::make_unique<asio::posix::stream_descriptor>(*io_, ::dup(STDIN_FILENO));
          auto* reader = new StdinReader(*stdin_, sc.max_line_bytes, *intake_, *figures);
          stdin_reader_.reset(reader);
          reader->read();
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
  if (config_->service.wall_clock)
    intake_->tick(std::chrono::time_point_cast<Seconds>(std::chrono::system_clock::now()));
  bool more = false;
  for (auto& g : follows_) {
    for (const std::string& path : expand(g->config.path)) {
      if (g->files.count(path)) continue;
      auto f = std::make_unique<FileFollower>(path, config_->service.max_line_bytes, g->figures);
      for (const checkpoint::FileMark& m : restored_marks_)
        if (m.path == path) f->resume_from(m);
      g->files.emplace(path, std::move(f));
    }
    for (auto& [path, f] : g->files) more |= f->poll(*intake_, kPollBudgetBytes);
  }
  schedule_poll(more ? std::chrono::milliseconds(0) : std::chrono::milliseconds(config_->service.poll_ms));
}

void Server::schedule_poll(std::chrono::milliseconds delay) {
  poll_timer_->expires_after(delay);
  poll_timer_->async_wait([this](std::error_code ec) {
    if (!ec) poll_files();
  });
}

void Server::schedule_checkpoint() {
  checkpoint_timer_->expires_after(config_->service.checkpoint_every);
  checkpoint_timer_->async_wait([this](std::error_code ec) {
    if (ec || stopping_) return;
    write_checkpoint();
    schedule_checkpoint();
  });
}

void Server::schedule_release() {
  // Checked once a second (release_idle is at least 1s); cheap when [fdr] is
  // off or no step is open. [fdr] can be turned on by a reload, so always armed.
  release_timer_->expires_after(std::chrono::seconds(1));
  release_timer_->async_wait([this](std::error_code ec) {
    if (ec || stopping_) return;
    const auto wall = std::chrono::time_point_cast<Seconds>(std::chrono::system_clock::now());
    intake_->release_step(wall, std::chrono::steady_clock::now(), config_->fdr);
    schedule_release();
  });
}

Status Server::write_checkpoint() {
  checkpoint::Marks marks;
  marks.alert_log_bytes = alert_log_->bytes();
  marks.written_unix = unix_now();
  for (const auto& g : follows_)
    for (const auto& [path, f] : g->files) marks.files.push_back(f->mark());
  // Files not opened yet keep the marks they were restored with.
  for (const checkpoint::FileMark& m : restored_marks_) {
    bool seen = false;
    for (const checkpoint::FileMark& n : marks.files) seen |= n.path == m.path;
    if (!seen) marks.files.push_back(m);
  }
  Status st = checkpoint::write_file(config_->service.checkpoint_path, intake_->engine(), marks);
  if (!st) {
    ++checkpoint_failures_;
    spdlog::error("{}", st.error().message);
    return st;
  }
  ++checkpoints_written_;
  last_checkpoint_unix_ = marks.written_unix;
  return st;
}

void Server::wait_signals() {
  signals_->async_wait([this](std::error_code ec, int signo) {
    if (ec) return;
    if (signo == SIGHUP) {
      reload();
    } else if (signo == SIGUSR1) {
      reopen_logs();
    } else {
      spdlog::info("signal {}: stopping", signo);
      shutdown();
      return;
    }
    wait_signals();
  });
}

void Server::reload() {
  auto loaded = load_config(options_.config_path);
  if (!loaded) {
    ++reload_failures_;
    spdlog::error("reload refused, the running config is kept: {}", loaded.error().message);
    return;
  }
  auto next = std::make_unique<MonitorConfig>(std::move(loaded).value());
  // The series carry over through their saved state, read with the new
  // settings: a model whose coefficient count changed cannot carry over.
  const std::string state = checkpoint::encode(intake_->engine(), checkpoint::Marks{});
  auto moved = checkpoint::decode(state, "running state", next->settings, next->limits, next->fdr);
  if (!moved) {
    ++reload_failures_;
    spdlog::error("reload refused, the running config is kept: the running series do not fit the new model: {}",
                  moved.error().message);
    return;
  }
  intake_->replace_engine(std::move(moved->engine));
  next->service = config_->service;  // sources, outputs, ports: at the next start
  config_ = std::move(next);
  ++reloads_;
  spdlog::info("config reloaded from {} (model, alert, fdr and limits tables; [[source]], [output], [checkpoint], "
               "[status] and [intake] changes take effect at the next start)",
               options_.config_path);
}

void Server::reopen_logs() {
  if (Status st = alert_log_->reopen(); !st) {
    spdlog::error("{}", st.error().message);
    return;
  }
  spdlog::info("alert logs reopened");
  // The checkpoint must describe the new file, not the moved one.
  write_checkpoint();
}

void Server::shutdown() {
  stopping_ = true;
  // Everything already read has been judged (one thread): checkpoint it all.
  write_checkpoint();
  for (auto& t : tcp_) t->stop();
  for (auto& u : udp_) u->stop();
  if (status_) status_->stop();
  if (stdin_) {
    std::error_code ec;
    stdin_->close(ec);
  }
  poll_timer_->cancel();
  checkpoint_timer_->cancel();
  release_timer_->cancel();
  io_->stop();
}

int Server::run() {
  wait_signals();
  poll_files();
  schedule_checkpoint();
  schedule_release();
  notify_ready();
  spdlog::info("serving: {} source(s), alerts to {}", config_->service.sources.size(), alert_log_->path());
  io_->run();
  notify_stopping();
  spdlog::info("stopped; {} series, checkpoint {}", intake_->engine().series_count(),
               config_->service.checkpoint_path);
  return checkpoint_failures_ > 0 && checkpoints_written_ == 0 ? 2 : 0;
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
