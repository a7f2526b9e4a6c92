#include "daemon/intake.h"

#include <spdlog/spdlog.h>

#include "daemon/step_release.h"
#include "engine/output_lines.h"

namespace tallyd::daemon {

void LatencyHistogram::add(double seconds) {
  std::size_t i = 0;
  while (i < kLatencyBounds.size() && seconds > kLatencyBounds[i]) ++i;
  ++counts[i];
  sum_seconds += seconds;
  ++total;
}

Intake::Intake(std::unique_ptr<Engine> engine, AlertLog& log, SteadyTime started)
    : engine_(std::move(engine)), log_(&log), last_line_(started) {}

std::unique_ptr<Engine> Intake::replace_engine(std::unique_ptr<Engine> engine) {
  std::swap(engine, engine_);
  return engine;
}

void Intake::refuse(const Rejection& r, SourceFigures& figures) {
  engine_->count_rejection(r.reason);
  ++figures.rejected;
  log_refusal(r);
}

// Same lines in the same order as replay_feeds (replay/replay.cc), so serving a
// file and replaying it write the same alert log.
void Intake::emit(const OfferResult& o, SourceFigures* figures) {
  if (o.refused) {
    if (figures) ++figures->rejected;
    log_refusal(*o.refused);
  }
  for (const Released& rel : o.released) {
    if (rel.result.rejection) {
      // Counted against the source whose record released it (exact when nothing is held).
      if (figures) ++figures->rejected;
      log_refusal(*rel.result.rejection);
    }
    write_lines(output_lines(rel));
  }
  write_lines(output_lines(o.silence));
}

void Intake::tick(TimePoint now) { emit(engine_->tick(now), nullptr); }

void Intake::offer(ParseOutcome& outcome, SourceFigures& figures, SteadyTime arrival) {
  last_line_ = std::max(last_line_, arrival);
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

void Intake::write_lines(std::vector<OutputLine> lines) {
  for (OutputLine& l : lines) {
    if (Status s = log_->write(l.json, l.text); !s) {
      ++write_failures_;
      spdlog::error("{}", s.error().message);
    }
    spdlog::info("{}: {}", l.alert ? "alert" : "episode", l.text);
    if (!l.alert) continue;
    last_alerts_.push_back(std::move(l.json));
    if (last_alerts_.size() > 20) last_alerts_.pop_front();
  }
}

bool Intake::release_step(TimePoint wall_now, SteadyTime now, const detect::FdrSpec& spec) {
  if (!step_release_due(engine_->fdr_state(), spec, wall_now, now - last_line_)) return false;
  const detect::FdrState& before = engine_->fdr_state();
  spdlog::info("releasing time step {} of the control across series ({} records waiting): no line read for {}s",
               before.open_step.value_or(0), before.pending.size(),
               std::chrono::duration_cast<std::chrono::seconds>(now - last_line_).count());
  write_lines(output_lines(engine_->flush()));
  ++steps_released_;
  return true;
}

}  // namespace tallyd::daemon
