#include "replay/replay.h"

#include <fmt/format.h>


namespace tallyd {

std::uint64_t write_lines(const ReplayOutputs& out, const std::vector<OutputLine>& lines) {
  std::uint64_t alerts = 0;
  for (const OutputLine& l : lines) {
    if (out.alerts_json) *out.alerts_json << l.json << '\n';
    if (out.alerts_text) *out.alerts_text << l.text << '\n';
    alerts += l.alert ? 1 : 0;
  }
  return alerts;
}

std::uint64_t replay_feeds(FeedSet& feeds, Engine& engine, const ReplayOutputs& out) {
  std::uint64_t written = 0;
  auto write = [&](const std::vector<OutputLine>& lines) { written += write_lines(out, lines); };
  // Late records and silence live in Engine::offer; this writes what comes out, in order.
  auto emit = [&](const OfferResult& o) {
    if (o.refused && out.on_rejection) out.on_rejection(*o.refused);
    for (const Released& rel : o.released) {
      if (rel.result.rejection) {
        if (out.on_rejection) out.on_rejection(*rel.result.rejection);
      } else if (out.on_record) {
        out.on_record(rel.record, rel.result);
      }
      write(output_lines(rel));
    }
    write(output_lines(o.silence));
  };
  FeedItem item;
  while (feeds.next(item)) {
    if (!item.is_record()) {
      const Rejection* bad = &item.rejection();
      engine.count_rejection(bad->reason);
      if (out.on_rejection) out.on_rejection(*bad);
      continue;
    }
    emit(engine.offer(item.record()));
  }
  // Records still held for late arrivals are due once the feeds end.
  emit(engine.drain());
  // The last time step of the control across series is complete once the feeds end.
  write(output_lines(engine.flush()));
  return written;
}

std::string describe_counters(const EngineCounters& c, std::size_t series_count) {
  const std::uint64_t rejected = c.rejected.total();
  std::string reasons;
  for (std::size_t i = 0; i < kRejectReasonCount; ++i) {
    if (c.rejected.by_reason[i] == 0) continue;
    if (!reasons.empty()) reasons += ", ";
    reasons += fmt::format("{} {}", reject_label(static_cast<RejectReason>(i)), c.rejected.by_reason[i]);
  }
  // Parser refusals never reach ingest, so the records read are those offered plus those.
  const std::uint64_t parser_rejected = rejected - (c.records - c.judged - c.warming_up);
  return fmt::format("{} records: {} judged, {} warming up, {} rejected{}; {} alerts ({} high, {} low); {} series",
                     c.records + parser_rejected, c.judged, c.warming_up, rejected,
                     reasons.empty() ? "" : " (" + reasons + ")", c.alerts_high + c.alerts_low, c.alerts_high,
                     c.alerts_low, series_count);
}

}  // namespace tallyd
