#include "daemon/intake.h"

#include <spdlog/spdlog.h>

#include "alert/alert_format.h"

namespace tallyd::daemon {

void LatencyHistogram::add(double seconds) {
  std::size_t i = 0;
  while (i < kLatencyBounds.size() && seconds > kLatencyBounds[i]) ++i;
  ++counts[i];
  sum_seconds += seconds;
  ++total;
}

Intake::Intake(std::unique_ptr<Engine> engine, AlertLog& log) : engine_(std::move(engine)), log_(&log) {}

std::unique_ptr<Engine> Intake::replace_engine(std::unique_ptr<Engine> engine) {
  std::swap(engine, engine_);
  return engine;
}

void Intake::warn_limited(const std::string& message) {
  const auto now = std::chrono::steady_clock::now();
  if (now - warn_window_ >= std::chrono::seconds(1)) {
    if (suppressed_ > 0) spdlog::warn("{} more refused records not shown (all are counted)", suppressed_);
    warn_window_ = now;
    warned_in_window_ = 0;
    suppressed_ = 0;
  }
  if (warned_in_window_ < kWarnPerSecond) {
    ++warned_in_window_;
    spdlog::warn("{}", message);
  } else {
    ++suppressed_;
  }
}

void Intake::refuse(const Rejection& r, SourceFigures& figures) {
  engine_->count_rejection(r.reason);
  ++figures.rejected;
  log_refusal(r);
}

void Intake::write_alert(const Alert& a) {
  std::string json = alert_json(a);
  const std::string text = alert_text(a);
  if (Status s = log_->write(json, text); !s) {
    ++write_failures_;
    spdlog::error("{}", s.error().message);
  }
  spdlog::info("alert: {}", text);
  last_alerts_.push_back(std::move(json));
  if (last_alerts_.size() > 20) last_alerts_.pop_front();
}

// Same lines in the same order as replay_feeds (replay/replay.cc), so serving a
// file and replaying it write the same alert log.
void Intake::emit(const OfferResult& o, SourceFigures* figures) {
  if (o.refused) {
    if (figures) ++figures->rejected;
    log_refusal(*o.refused);
  }
  for (const Released& rel : o.released) {
    for (const Alert& a : rel.silence) write_alert(a);
    const IngestResult& r = rel.result;
    if (r.rejection) {
      // A held record is refused long after its source read it; it is counted by reason in the engine.
      if (figures) ++figures->rejected;
      log_refusal(*r.rejection);
      continue;
    }
    if (r.recovery) write_alert(*r.recovery);
    for (const Alert& a : r.released) write_alert(a);
    if (r.alert) write_alert(*r.alert);
    for (const Alert& a : r.detector_alerts) write_alert(a);
  }
  for (const Alert& a : o.silence) write_alert(a);
}

void Intake::tick(TimePoint now) { emit(engine_->tick(now), nullptr); }

void Intake::offer(ParseOutcome& outcome, SourceFigures& figures, SteadyTime arrival) {
  switch (outcome.kind()) {
    case LineKind::skip: return;
    case LineKind::rejected: refuse(outcome.rejection(), figures); return;
    case LineKind::record: break;
  }
  ++figures.records;
  emit(engine_->offer(outcome.record()), &figures);
  const std::chrono::duration<double> took = std::chrono::steady_clock::now() - arrival;
  latency_.add(took.count());
}

}  // namespace tallyd::daemon
