// The status endpoint's two documents: /state (JSON) and /metrics
// (OpenMetrics text format 1.0.0). Part of Server; loop thread only. The
// judging side's figures come from one snapshot (JudgeThread::snapshot), so
// they agree with each other and the answer never waits for the engine.
#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "daemon/server.h"

namespace tallyd::daemon {
namespace {

std::string label_value(std::string_view s) {
  // OpenMetrics label values escape backslash, double quote and newline.
  std::string out;
  for (char c : s) {
    if (c == '\\') out += "\\\\";
    else if (c == '"') out += "\\\"";
    else if (c == '\n') out += "\\n";
    else out += c;
  }
  return out;
}

std::uint64_t judged_bytes(const JudgedFigures& jf, const std::string& path) {
  auto it = jf.judged_bytes.find(path);
  return it == jf.judged_bytes.end() ? 0 : it->second;
}

std::int64_t unix_now() {
  return std::chrono::duration_cast<std::chrono::seconds>(std::chrono::system_clock::now().time_since_epoch()).count();
}

}  // namespace

std::string Server::status_json() const {
  using nlohmann::json;
  const JudgedFigures jf = judge_->snapshot();
  const EngineCounters& c = jf.counters;
  json j;
  j["uptime_seconds"] =
      std::chrono::duration_cast<std::chrono::seconds>(std::chrono::steady_clock::now() - started_).count();
  j["series"] = jf.series;
  j["records"] = c.records;
  j["judged"] = c.judged;
  j["warming_up"] = c.warming_up;
  json rej = json::object();
  for (std::size_t i = 0; i < kRejectReasonCount; ++i)
    rej[std::string(reject_label(static_cast<RejectReason>(i)))] = c.rejected.by_reason[i];
  j["rejected"] = rej;
  j["alerts"] = {{"high", c.alerts_high}, {"low", c.alerts_low}};
  j["silence"] = {{"alerts", c.alerts_silence}, {"ended", c.silence_ends}, {"silent_now", jf.silent_now}};
  j["arrival"] = {{"held", jf.held}, {"duplicates_replaced", c.duplicates_replaced}};
  j["episodes"] = {{"open", jf.episodes_open}, {"opened", jf.episodes_opened}, {"closed", jf.episodes_closed}};
  if (jf.fdr_enabled) {
    j["fdr"] = {{"open_step", jf.fdr_open_step ? json(*jf.fdr_open_step) : json(nullptr)},
                {"waiting_records", jf.fdr_waiting},
                {"steps_released_by_rule", jf.fdr_steps_released}};
  }
  j["queue"] = {{"lines", handoff_->queued_lines()}, {"capacity", handoff_->capacity()}};
  j["alert_log"] = {{"path", jf.alert_log_path}, {"bytes", jf.alert_log_bytes}};
  j["checkpoint"] = {{"path", service_.checkpoint_path},
                     {"written", jf.checkpoints_written},
                     {"failures", jf.checkpoint_failures},
                     {"age_seconds", unix_now() - jf.last_checkpoint_unix}};
  j["reloads"] = {{"applied", jf.reloads_applied}, {"refused", jf.reloads_refused}};
  json sources = json::array();
  std::size_t k = 0;  // index into jf.sources, in all_figures() order
  for (const auto& g : follows_) {
    json files = json::array();
    for (const auto& [path, f] : g->files) {
      const std::uint64_t judged = judged_bytes(jf, path);
      files.push_back({{"path", path},
                       {"open", f->is_open()},
                       {"offset", judged},
                       {"read", f->consumed()},
                       {"size", f->size_seen()},
                       {"lag_bytes", f->size_seen() > judged ? f->size_seen() - judged : 0}});
    }
    sources.push_back({{"name", g->figures.name}, {"kind", "follow"}, {"pattern", g->config.path},
                       {"records", jf.sources[k].first}, {"rejected", jf.sources[k].second}, {"files", files}});
    ++k;
  }
  for (const auto& f : socket_figures_) {
    json s = {{"name", f->name}, {"kind", f->kind}, {"records", jf.sources[k].first}, {"rejected", jf.sources[k].second}};
    ++k;
    if (f->kind == "tcp") {
      s["connections"] = f->connections;
      s["connections_refused"] = f->connections_refused;
    }
    if (f->kind == "udp") s["dropped_queue_full"] = f->dropped_queue_full;
    sources.push_back(s);
  }
  j["sources"] = sources;
  json last = json::array();
  for (const std::string& a : jf.last_alerts) last.push_back(json::parse(a));
  j["last_alerts"] = last;
  return j.dump(1) + "\n";
}

namespace {

// One metric without labels, in the OpenMetrics text format: its TYPE and
// HELP lines, then its sample (a counter's sample carries the _total suffix).
template <typename Value>
void add_scalar(std::string& m, std::string_view name, std::string_view type, std::string_view help, Value value) {
  m += fmt::format("# TYPE {} {}\n# HELP {} {}\n", name, type, name, help);
  m += fmt::format("{}{} {}\n", name, type == "counter" ? "_total" : "", value);
}

}  // namespace

std::string Server::metrics_text() const {
  const JudgedFigures jf = judge_->snapshot();
  const EngineCounters& c = jf.counters;
  std::string m;
  add_scalar(m, "tallyd_records", "counter", "Records offered to the engine.", c.records);
  m += "# TYPE tallyd_rejections counter\n# HELP tallyd_rejections Refused lines and records, by reason.\n";
  for (std::size_t i = 0; i < kRejectReasonCount; ++i)
    m += fmt::format("tallyd_rejections_total{{reason=\"{}\"}} {}\n", reject_label(static_cast<RejectReason>(i)),
                     c.rejected.by_reason[i]);
  m += "# TYPE tallyd_alerts counter\n# HELP tallyd_alerts Alerts written, by direction.\n";
  m += fmt::format("tallyd_alerts_total{{direction=\"high\"}} {}\n", c.alerts_high);
  m += fmt::format("tallyd_alerts_total{{direction=\"low\"}} {}\n", c.alerts_low);
  add_scalar(m, "tallyd_held_records", "gauge", "Records held back for late arrivals ([arrival]).", jf.held);
  add_scalar(m, "tallyd_silent_series", "gauge", "Series reported silent and not heard from since.", jf.silent_now);
  add_scalar(m, "tallyd_episodes_open", "gauge", "Episodes open now (series and direction with an alert not yet followed by enough quiet records).", jf.episodes_open);
  add_scalar(m, "tallyd_episodes_opened", "counter", "Episodes opened.", jf.episodes_opened);
  add_scalar(m, "tallyd_episodes_closed", "counter", "Episodes closed.", jf.episodes_closed);
  add_scalar(m, "tallyd_fdr_waiting_records", "gauge", "Judged records waiting for their time step to be released ([fdr]).", jf.fdr_waiting);
  add_scalar(m, "tallyd_fdr_steps_released", "counter", "Time steps released by the service's quiet rule ([fdr] release_delay, release_idle).", jf.fdr_steps_released);
  add_scalar(m, "tallyd_series", "gauge", "Series with a model.", jf.series);
  add_scalar(m, "tallyd_checkpoint_age_seconds", "gauge", "Seconds since the last checkpoint was written.", unix_now() - jf.last_checkpoint_unix);
  add_scalar(m, "tallyd_queued_lines", "gauge", "Lines read and waiting to be judged.", handoff_->queued_lines());
  m += "# TYPE tallyd_source_records counter\n# HELP tallyd_source_records Records parsed, by source.\n";
  const std::vector<const SourceFigures*> figures = all_figures();
  for (std::size_t k = 0; k < figures.size(); ++k)
    m += fmt::format("tallyd_source_records_total{{source=\"{}\"}} {}\n", label_value(figures[k]->name),
                     jf.sources[k].first);
  m += "# TYPE tallyd_udp_dropped counter\n# HELP tallyd_udp_dropped Datagrams dropped unread because the judging queue was full.\n";
  for (const SourceFigures* f : figures)
    if (f->kind == "udp")
      m += fmt::format("tallyd_udp_dropped_total{{source=\"{}\"}} {}\n", label_value(f->name), f->dropped_queue_full);
  m += "# TYPE tallyd_follow_offset_bytes gauge\n# HELP tallyd_follow_offset_bytes Bytes of a followed file judged.\n";
  for (const auto& g : follows_)
    for (const auto& [path, f] : g->files)
      m += fmt::format("tallyd_follow_offset_bytes{{source=\"{}\",path=\"{}\"}} {}\n", label_value(g->figures.name),
                       label_value(path), judged_bytes(jf, path));
  m += "# TYPE tallyd_follow_lag_bytes gauge\n# HELP tallyd_follow_lag_bytes Bytes of a followed file not yet judged (read or not).\n";
  for (const auto& g : follows_)
    for (const auto& [path, f] : g->files) {
      const std::uint64_t judged = judged_bytes(jf, path);
      m += fmt::format("tallyd_follow_lag_bytes{{source=\"{}\",path=\"{}\"}} {}\n", label_value(g->figures.name),
                       label_value(path), f->size_seen() > judged ? f->size_seen() - judged : 0);
    }
  m += "# TYPE tallyd_processing_latency_seconds histogram\n"
       "# HELP tallyd_processing_latency_seconds From a line's bytes read to its record judged and any alert written.\n";
  const LatencyHistogram& h = jf.latency;
  std::uint64_t cumulative = 0;
  for (std::size_t i = 0; i < kLatencyBounds.size(); ++i) {
    cumulative += h.counts[i];
    m += fmt::format("tallyd_processing_latency_seconds_bucket{{le=\"{}\"}} {}\n", kLatencyBounds[i], cumulative);
  }
  cumulative += h.counts.back();
  m += fmt::format("tallyd_processing_latency_seconds_bucket{{le=\"+Inf\"}} {}\n", cumulative);
  m += fmt::format("tallyd_processing_latency_seconds_count {}\n", h.total);
  m += fmt::format("tallyd_processing_latency_seconds_sum {}\n", h.sum_seconds);
  m += "# EOF\n";
  return m;
}

}  // namespace tallyd::daemon
