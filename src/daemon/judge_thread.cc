#include "daemon/judge_thread.h"

#include <fmt/format.h>
#include <spdlog/spdlog.h>

namespace tallyd::daemon {
namespace {

// During a backlog the snapshot is refreshed at most this often (copying it
// after every small batch would cost more than judging some of them).
constexpr auto kPublishEvery = std::chrono::milliseconds(50);

std::int64_t unix_now() {
  return std::chrono::duration_cast<std::chrono::seconds>(std::chrono::system_clock::now().time_since_epoch()).count();
}

}  // namespace

JudgeThread::JudgeThread(JudgeSetup setup, Handoff& handoff, std::function<void()> on_finished)
    : s_(std::move(setup)), handoff_(&handoff), on_finished_(std::move(on_finished)) {
  for (checkpoint::FileMark& m : s_.marks) judged_marks_[m.path] = std::move(m);
  s_.marks.clear();
  publish(true);
}

JudgeThread::~JudgeThread() { join(); }

void JudgeThread::start() {
  thread_ = std::thread([this] { run(); });
}

void JudgeThread::join() {
  if (thread_.joinable()) thread_.join();
}

void JudgeThread::run() {
  try {
    while (std::optional<HandoffJob> job = handoff_->pop()) {
      if (auto* batch = std::get_if<LineBatch>(&*job)) {
        judge(*batch);
        handoff_->done(batch->lines.size());
        publish(handoff_->queued_lines() == 0);
      } else {
        std::get<HandoffTask>(*job)();
        publish(true);
      }
    }
    // Closed and drained: everything read has been judged.
    write_checkpoint();
    publish(true);
  } catch (const std::exception& e) {
    // Unexpected (the data path returns errors as values): stop the service
    // rather than keep reading what nobody judges.
    spdlog::critical("the judging thread stopped: {}; the last checkpoint stands", e.what());
    failed_ = true;
  }
  on_finished_();
}

void JudgeThread::judge(LineBatch& batch) {
  for (ParseOutcome& line : batch.lines) s_.intake->offer(line, *batch.figures, batch.arrival);
  if (batch.mark) judged_marks_[batch.mark->path] = std::move(*batch.mark);
}

Status JudgeThread::write_checkpoint_now() {
  Status st = write_checkpoint();
  publish(true);
  return st;
}

void JudgeThread::request_checkpoint() {
  handoff_->post([this] { write_checkpoint(); });
}

void JudgeThread::request_reload() {
  handoff_->post([this] { reload(); });
}

void JudgeThread::request_reopen() {
  handoff_->post([this] { reopen(); });
}

void JudgeThread::request_tick(TimePoint wall_now) {
  handoff_->post([this, wall_now] { s_.intake->tick(wall_now); });
}

void JudgeThread::request_release() {
  handoff_->post([this] {
    // Lines read and still queued behind this task: the backlog is not over.
    if (handoff_->queued_lines() > 0) return;
    const auto wall = std::chrono::time_point_cast<Seconds>(std::chrono::system_clock::now());
    s_.intake->release_step(wall, std::chrono::steady_clock::now(), s_.config->fdr);
  });
}

Status JudgeThread::write_checkpoint() {
  checkpoint::Marks marks;
  marks.alert_log_bytes = s_.log->bytes();
  marks.written_unix = unix_now();
  for (const auto& [path, m] : judged_marks_) marks.files.push_back(m);
  Status st = checkpoint::write_file(s_.config->service.checkpoint_path, s_.intake->engine(), marks);
  if (!st) {
    ++checkpoint_failures_;
    spdlog::error("{}", st.error().message);
    return st;
  }
  ++checkpoints_written_;
  s_.last_checkpoint_unix = marks.written_unix;
  return st;
}

void JudgeThread::reload() {
  auto loaded = load_config(s_.config_path);
  if (!loaded) {
    ++reload_failures_;
    spdlog::error("reload refused, the running config is kept: {}", loaded.error().message);
    return;
  }
  auto next = std::make_unique<MonitorConfig>(std::move(loaded).value());
  // The series carry over through their saved state, read with the new
  // settings: a model whose coefficient count changed cannot carry over.
  const std::string state = checkpoint::encode(s_.intake->engine(), checkpoint::Marks{});
  auto moved = checkpoint::decode(state, "running state", next->settings, next->limits, next->fdr);
  if (!moved) {
    ++reload_failures_;
    spdlog::error("reload refused, the running config is kept: the running series do not fit the new model: {}",
                  moved.error().message);
    return;
  }
  s_.intake->replace_engine(std::move(moved->engine));  // the old engine, pointing into the old config, goes here
  next->service = s_.config->service;  // sources, outputs, ports: at the next start
  s_.config = std::move(next);
  ++reloads_;
  spdlog::info("config reloaded from {} (model, alert, fdr and limits tables; [[source]], [output], [checkpoint], "
               "[status] and [intake] changes take effect at the next start)",
               s_.config_path);
}

void JudgeThread::reopen() {
  if (Status st = s_.log->reopen(); !st) {
    spdlog::error("{}", st.error().message);
    return;
  }
  spdlog::info("alert logs reopened");
  // The checkpoint must describe the new file, not the moved one.
  write_checkpoint();
}

void JudgeThread::publish(bool force) {
  const auto now = std::chrono::steady_clock::now();
  if (!force && now - published_at_ < kPublishEvery) return;
  published_at_ = now;
  const Engine& e = s_.intake->engine();
  JudgedFigures f;
  f.counters = e.counters();
  f.series = e.series_count();
  f.held = e.held_count();
  f.silent_now = e.silence().silent_count();
  f.episodes_open = e.episodes().open_count();
  f.episodes_opened = e.episodes().totals().opened;
  f.episodes_closed = e.episodes().totals().closed;
  f.fdr_enabled = s_.config->fdr.enabled;
  f.fdr_open_step = e.fdr_state().open_step;
  f.fdr_waiting = e.fdr_state().pending.size();
  f.fdr_steps_released = s_.intake->steps_released();
  f.alert_log_path = s_.log->path();
  f.alert_log_bytes = s_.log->bytes();
  f.checkpoints_written = checkpoints_written_;
  f.checkpoint_failures = checkpoint_failures_;
  f.last_checkpoint_unix = s_.last_checkpoint_unix;
  f.reloads_applied = reloads_;
  f.reloads_refused = reload_failures_;
  f.latency = s_.intake->latency();
  f.last_alerts = s_.intake->last_alerts();
  for (const SourceFigures* src : s_.sources) f.sources.emplace_back(src->records, src->rejected);
  for (const auto& [path, m] : judged_marks_) f.judged_bytes[path] = m.offset;
  std::lock_guard lock(published_mutex_);
  published_ = std::move(f);
}

JudgedFigures JudgeThread::snapshot() const {
  std::lock_guard lock(published_mutex_);
  return published_;
}

}  // namespace tallyd::daemon
