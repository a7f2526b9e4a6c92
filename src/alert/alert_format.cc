#include "alert/alert_format.h"

#include <fmt/format.h>
#include <nlohmann/json.hpp>

namespace tallyd {
namespace {

// JSON string escaping via nlohmann (handles control characters and UTF-8).
std::string quoted(const std::string& s) { return nlohmann::json(s).dump(); }

std::string alert_summary(const Alert& a);

}  // namespace

std::string alert_json(const Alert& a) {
  // Fixed notation: expected to 4 significant decimals, p-values to 4
  // significant digits; fmt's formatting is locale-independent and exact.
  std::string line = fmt::format(
      R"({{"time":"{}","series":{},"count":{},"expected":{:.4f},"lower":{},"upper":{},"p_value":{:.4g},"direction":"{}","exposure":{:.6g},"alpha":{:.6g},"detector":"{}","statistic":{:.6g})",
      format_time(a.time), quoted(a.series), a.count, a.expected, a.lower, a.upper, a.p_value,
      to_string(a.side), a.exposure, a.alpha, a.detector, a.statistic);
  // Appended, so the keys written before episodes existed stay a prefix in the same order.
  if (a.episode)
    line += fmt::format(R"(,"episode":{},"episode_state":"{}")", quoted(a.episode->id), to_string(a.episode->step));
  // Silence lines carry one more key, after every key the other lines have.
  if (a.last_seen) line += fmt::format(R"(,"last_seen":"{}")", format_time(*a.last_seen));
  line += '}';
  return line;
}

std::string alert_text(const Alert& a) {
  std::string line = alert_summary(a);
  if (a.episode) line += fmt::format(" [episode {} {}]", a.episode->id, to_string(a.episode->step));
  return line;
}

std::string episode_end_json(const EpisodeEnd& e) {
  return fmt::format(
      R"({{"episode_closed":{},"series":{},"direction":"{}","opened":"{}","last_alert":"{}","closed":"{}","alerts":{},"quiet_records":{}}})",
      quoted(e.id), quoted(e.series), to_string(e.side), format_time(e.opened), format_time(e.last_alert),
      format_time(e.closed), e.alerts, e.quiet_records);
}

std::string episode_end_text(const EpisodeEnd& e) {
  return fmt::format("{} {} {} episode {} closed: {} alert{} from {} to {}, then {} record{} with no {} alert",
                     format_time(e.closed), e.series, e.side == AlertSide::high ? "HIGH" : "LOW", e.id, e.alerts,
                     e.alerts == 1 ? "" : "s", format_time(e.opened), format_time(e.last_alert), e.quiet_records,
                     e.quiet_records == 1 ? "" : "s", to_string(e.side));
}

namespace {

std::string alert_summary(const Alert& a) {
  if (a.detector == "shift")
    return fmt::format("{} {} {} sustained shift: CUSUM {:.3g} nats over its limit (count {}, expected {:.1f}, exposure {:.6g})",
                       format_time(a.time), a.series, a.side == AlertSide::high ? "HIGH" : "LOW", a.statistic,
                       a.count, a.expected, a.exposure);
  if (a.detector == "low_run")
    return fmt::format("{} {} LOW run of {:.0f} low counts, joint probability {:.2g} (count {}, expected {:.1f})",
                       format_time(a.time), a.series, a.statistic, a.p_value, a.count, a.expected);
  if (a.detector == "silence")
    return fmt::format("{} {} SILENT: no record since {} (usual interval {})", format_time(a.time), a.series,
                       a.last_seen ? format_time(*a.last_seen) : "?",
                       format_duration(Seconds{static_cast<std::int64_t>(a.statistic)}));
  if (a.detector == "silence_end")
    return fmt::format("{} {} REPORTING again after {} without a record (count {}, exposure {:.6g})",
                       format_time(a.time), a.series, format_duration(Seconds{static_cast<std::int64_t>(a.statistic)}),
                       a.count, a.exposure);
  if (a.side == AlertSide::high)
    return fmt::format("{} {} HIGH count {} > upper {} (expected {:.1f}, p={:.2g}, exposure {:.6g})",
                       format_time(a.time), a.series, a.count, a.upper, a.expected, a.p_value, a.exposure);
  return fmt::format("{} {} LOW count {} < lower {} (expected {:.1f}, p={:.2g}, exposure {:.6g})",
                     format_time(a.time), a.series, a.count, a.lower, a.expected, a.p_value, a.exposure);
}

}  // namespace

}  // namespace tallyd
