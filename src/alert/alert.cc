#include "alert/alert.h"

namespace tallyd {

std::string_view to_string(AlertSide s) { return s == AlertSide::high ? "high" : "low"; }

std::string_view to_string(EpisodeStep s) { return s == EpisodeStep::opened ? "new" : "ongoing"; }

std::optional<Alert> judge_count(const Observation& obs, const bounds::Bounds& b, const AlertSpec& spec) {
  const bool watch_high = spec.direction != Direction::low;
  const bool watch_low = spec.direction != Direction::high;
  std::optional<AlertSide> side;
  double p = 1;
  if (watch_high && b.p_high <= spec.alpha) {
    side = AlertSide::high;
    p = b.p_high;
  } else if (watch_low && b.p_low <= spec.alpha) {
    side = AlertSide::low;
    p = b.p_low;
  }
  if (!side) return std::nullopt;
  return bound_alert(obs, b, *side, p, spec.alpha);
}

Alert bound_alert(const Observation& obs, const bounds::Bounds& b, AlertSide side, double p_value, double alpha) {
  Alert a;
  a.time = obs.time;
  a.series = obs.series;
  a.count = obs.count;
  a.exposure = obs.exposure;
  a.expected = b.expected;
  a.lower = b.lower;
  a.upper = b.upper;
  a.p_value = p_value;
  a.alpha = alpha;
  a.side = side;
  a.statistic = p_value;
  return a;
}

}  // namespace tallyd
