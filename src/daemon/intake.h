// Intake: the service's handler. It takes decoded lines from every source,
// feeds records to the engine, writes alerts to the alert log and keeps the
// figures the status endpoint shows. It touches no sockets and no files other
// than through AlertLog. Not thread-safe: in `tallyd serve` it belongs to the
// judging thread (daemon/judge_thread.h).
#pragma once

#include <array>
#include <chrono>
#include <cstdint>
#include <deque>
#include <memory>
#include <string>
#include <vector>

#include "daemon/alert_log.h"
#include "daemon/warn_limiter.h"
#include "engine/engine.h"
#include "engine/output_lines.h"
#include "feed/parse_outcome.h"

namespace tallyd::daemon {

using SteadyTime = std::chrono::steady_clock::time_point;

// Per-source figures for status and metrics. In `tallyd serve` each field
// has one writer: `records` and `rejected` the judging thread (Intake), the
// others the event-loop thread (the sources); the status endpoint reads the
// judging thread's fields from its published snapshot only.
struct SourceFigures {
  std::string name;
  std::string kind;            // follow, tcp, udp, stdin
  std::uint64_t records = 0;   // lines that parsed into records (accepted or not by the engine)
  std::uint64_t rejected = 0;  // refusals by the parser or the engine
  std::uint64_t connections = 0;          // tcp: accepted so far
  std::uint64_t connections_refused = 0;  // tcp: closed at once because of max_connections
  std::uint64_t dropped_queue_full = 0;   // udp: datagrams dropped unread because the judging queue was full
};

// Upper bounds (seconds) of the processing-latency histogram buckets: from a
// line's arrival (its bytes read) to the end of its judgement, alert written.
inline constexpr std::array<double, 10> kLatencyBounds = {1e-5, 3e-5, 1e-4, 3e-4, 1e-3, 3e-3, 0.01, 0.03, 0.1, 1.0};

struct LatencyHistogram {
  std::array<std::uint64_t, kLatencyBounds.size() + 1> counts{};  // last: +Inf
  double sum_seconds = 0;
  std::uint64_t total = 0;
  void add(double seconds);
};

class Intake {
 public:
  // `started`: when the service started (the idle time of the step release counts from it until a line is read).
  Intake(std::unique_ptr<Engine> engine, AlertLog& log, SteadyTime started = std::chrono::steady_clock::now());

  // One decoded line from a source. Records go to the engine, and the lines
  // its result adds (alerts, episode closings: engine/output_lines.h) to the
  // alert log; refusals are counted and logged at most a few times a second.
  void offer(ParseOutcome& outcome, SourceFigures& figures, SteadyTime arrival);
  // With control across series on: releases the engine's open time step
  // (Engine::flush) and writes its alerts when daemon/step_release.h says it
  // is due at wall-clock `wall_now`, `now` being the steady clock (the idle
  // time runs from the latest line offered). Returns whether it released.
  bool release_step(TimePoint wall_now, SteadyTime now, const detect::FdrSpec& spec);
  std::uint64_t steps_released() const { return steps_released_; }
  // A refusal made before the engine (by a decoder, or a datagram too large): counted and logged.
  void refuse(const Rejection& r, SourceFigures& figures);

  // Moves the engine's data clock to `now` (the optional wall clock of
  // [intake] clock = "wall"): writes what held records and silence it releases.
  void tick(TimePoint now);

  Engine& engine() { return *engine_; }
  const Engine& engine() const { return *engine_; }
  // Swaps in another engine (a config reload); the old one is returned.
  std::unique_ptr<Engine> replace_engine(std::unique_ptr<Engine> engine);

  const LatencyHistogram& latency() const { return latency_; }
  const std::deque<std::string>& last_alerts() const { return last_alerts_; }  // JSON lines of alerts (not closings), newest last
  std::uint64_t write_failures() const { return write_failures_; }

 private:
  void log_refusal(const Rejection& r) { warnings_.warn(r.describe()); }
  void write_lines(std::vector<OutputLine> lines);
  // Writes and counts what one offer or tick released; `figures` is the
  // source of the offered record (null for a tick).
  void emit(const OfferResult& o, SourceFigures* figures);

  std::unique_ptr<Engine> engine_;
  AlertLog* log_;
  LatencyHistogram latency_;
  std::deque<std::string> last_alerts_;
  std::uint64_t write_failures_ = 0;
  SteadyTime last_line_;               // arrival of the latest line offered (or the start)
  std::uint64_t steps_released_ = 0;   // time steps released by release_step
  WarnLimiter warnings_;  // refusal warnings: at most 5 a second
};

}  // namespace tallyd::daemon
