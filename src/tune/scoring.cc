#include "tune/scoring.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <map>
#include <optional>

namespace tallyd::tune {

int flagged_side(const JudgedRecord& r, double alpha) {
  if (r.direction != Direction::low && r.p_high <= alpha) return 1;
  if (r.direction != Direction::high && r.p_low <= alpha) return -1;
  return 0;
}

double quantile7(std::vector<double>& values, double p) {
  if (values.empty()) return std::numeric_limits<double>::quiet_NaN();
  std::sort(values.begin(), values.end());
  const double h = (static_cast<double>(values.size()) - 1) * p;
  const auto lo = static_cast<std::size_t>(std::floor(h));
  const std::size_t hi = std::min(lo + 1, values.size() - 1);
  return values[lo] + (h - static_cast<double>(lo)) * (values[hi] - values[lo]);
}

Score score_alpha(const JudgedLog& log, const std::vector<Episode>& episodes, double alpha) {
  constexpr double nan = std::numeric_limits<double>::quiet_NaN();
  Score s;
  s.alpha = alpha;
  s.episodes_listed = episodes.size();

  // Episodes by series index; episodes of unknown series stay unjudged.
  std::map<std::string, std::uint32_t> index;
  for (std::uint32_t i = 0; i < log.series_ids.size(); ++i) index.emplace(log.series_ids[i], i);
  std::vector<std::vector<std::size_t>> by_series(log.series_ids.size());
  for (std::size_t e = 0; e < episodes.size(); ++e) {
    auto it = index.find(episodes[e].series);
    if (it != index.end()) by_series[it->second].push_back(e);
  }
  std::vector<bool> judged_in(episodes.size(), false);
  std::vector<std::optional<TimePoint>> first_alert(episodes.size());
  std::vector<std::optional<TimePoint>> first_time(log.series_ids.size()), last_time(log.series_ids.size());

  for (const JudgedRecord& r : log.records) {
    ++s.judged;
    if (!first_time[r.series] || r.time < *first_time[r.series]) first_time[r.series] = r.time;
    if (!last_time[r.series] || r.time > *last_time[r.series]) last_time[r.series] = r.time;
    const bool alerted = flagged_side(r, alpha) != 0;
    bool in_any = false;
    for (std::size_t e : by_series[r.series]) {
      if (!inside(episodes[e], r.time)) continue;
      in_any = true;
      judged_in[e] = true;
      if (alerted && (!first_alert[e] || r.time < *first_alert[e])) first_alert[e] = r.time;
    }
    if (alerted) ++s.alerts;
    if (alerted && !in_any) ++s.false_alerts;
    if (in_any) {
      ++s.episode_records;
      if (alerted) ++s.episode_records_alerted;
    }
  }

  for (std::size_t i = 0; i < log.series_ids.size(); ++i)
    if (first_time[i]) s.series_years += years_between(*first_time[i], *last_time[i]);
  s.false_per_series_year = s.series_years > 0 ? static_cast<double>(s.false_alerts) / s.series_years : nan;

  std::vector<double> delays;
  for (std::size_t e = 0; e < episodes.size(); ++e) {
    if (!judged_in[e]) continue;
    ++s.episodes_judged;
    if (!first_alert[e]) continue;
    ++s.episodes_hit;
    delays.push_back(static_cast<double>((*first_alert[e] - episodes[e].start).count()) / kSecondsPerDay);
  }
  s.detection = s.episodes_judged > 0 ? static_cast<double>(s.episodes_hit) / static_cast<double>(s.episodes_judged) : nan;
  s.delay_median_days = quantile7(delays, 0.5);
  s.delay_p90_days = quantile7(delays, 0.9);
  s.episode_record_fraction =
      s.episode_records > 0 ? static_cast<double>(s.episode_records_alerted) / static_cast<double>(s.episode_records) : nan;
  return s;
}

}  // namespace tallyd::tune
