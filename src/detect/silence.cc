#include "detect/silence.h"

#include <algorithm>
#include <cmath>

#include <fmt/format.h>

#include "core/state_codec.h"

namespace tallyd::detect {

std::optional<Seconds> median_gap(const std::deque<std::int64_t>& gaps_seconds) {
  if (gaps_seconds.empty()) return std::nullopt;
  std::vector<std::int64_t> v(gaps_seconds.begin(), gaps_seconds.end());
  const std::size_t mid = v.size() / 2;
  std::nth_element(v.begin(), v.begin() + static_cast<std::ptrdiff_t>(mid), v.end());
  const std::int64_t upper = v[mid];
  if (v.size() % 2 == 1) return Seconds{upper};
  const std::int64_t lower = *std::max_element(v.begin(), v.begin() + static_cast<std::ptrdiff_t>(mid));
  // Rounded half up; integer arithmetic keeps it exact for any gap length.
  return Seconds{lower + (upper - lower + 1) / 2};
}

std::optional<Alert> SilenceWatch::report(const Observation& obs, const DetectSpec& spec) {
  auto [it, fresh] = tracks_.try_emplace(obs.series);
  Track& t = it->second;
  std::optional<Alert> recovery;
  if (!fresh) {
    const std::int64_t gap = (obs.time - t.last).count();
    if (t.silent) {
      Alert a;
      a.time = obs.time;
      a.series = obs.series;
      a.count = obs.count;
      a.exposure = obs.exposure;
      a.p_value = 1;
      a.side = AlertSide::low;
      a.detector = kSilenceEndLabel;
      a.statistic = static_cast<double>(gap);
      a.last_seen = t.last;
      recovery = std::move(a);
      t.silent = false;
    }
    if (gap > 0) {
      t.gaps.push_back(gap);
      while (t.gaps.size() > std::max<std::uint32_t>(spec.silence_window, 1)) t.gaps.pop_front();
    }
  }
  t.last = obs.time;
  if (t.deadline) deadlines_.erase({*t.deadline, obs.series});
  t.deadline.reset();
  if (t.gaps.size() >= spec.silence_min_gaps) {
    const std::int64_t usual = median_gap(t.gaps)->count();
    const double allowed = std::ceil(spec.silence_multiple * static_cast<double>(usual));
    t.usual_seconds = usual;
    t.deadline = obs.time + Seconds{static_cast<std::int64_t>(allowed)};
    deadlines_.emplace(*t.deadline, obs.series);
  }
  return recovery;
}

std::vector<Alert> SilenceWatch::advance(TimePoint now) {
  std::vector<Alert> out;
  if (clock_ && now <= *clock_) return out;
  clock_ = now;
  while (!deadlines_.empty() && deadlines_.begin()->first < now) {
    const auto [deadline, series] = *deadlines_.begin();
    deadlines_.erase(deadlines_.begin());
    Track& t = tracks_.at(series);
    t.deadline.reset();
    t.silent = true;
    Alert a;
    a.time = deadline;
    a.series = series;
    a.count = 0;
    a.exposure = 0;
    a.p_value = 1;
    a.side = AlertSide::low;
    a.detector = kSilenceLabel;
    a.statistic = static_cast<double>(t.usual_seconds);
    a.last_seen = t.last;
    out.push_back(std::move(a));
  }
  return out;
}

std::optional<Seconds> SilenceWatch::usual_interval(const std::string& series) const {
  auto it = tracks_.find(series);
  if (it == tracks_.end() || (!it->second.deadline && !it->second.silent)) return std::nullopt;
  return Seconds{it->second.usual_seconds};
}

std::size_t SilenceWatch::silent_count() const {
  std::size_t n = 0;
  for (const auto& [id, t] : tracks_) n += t.silent ? 1 : 0;
  return n;
}

void SilenceWatch::save_state(StateWriter& w) const {
  w.tag("silence");
  w.boolean(clock_.has_value());
  w.i64(clock_ ? clock_->time_since_epoch().count() : 0);
  w.u64(tracks_.size());
  w.newline();
  for (const auto& [id, t] : tracks_) {
    w.tag("silence_series");
    w.str(id);
    w.i64(t.last.time_since_epoch().count());
    w.boolean(t.silent);
    w.boolean(t.deadline.has_value());
    w.i64(t.deadline ? t.deadline->time_since_epoch().count() : 0);
    w.i64(t.usual_seconds);
    w.u64(t.gaps.size());
    for (std::int64_t g : t.gaps) w.i64(g);
    w.newline();
  }
}

void SilenceWatch::load_state(StateReader& r) {
  r.expect("silence");
  const bool has_clock = r.boolean();
  const std::int64_t clock = r.i64();
  clock_ = has_clock ? std::optional<TimePoint>(TimePoint{Seconds{clock}}) : std::nullopt;
  const std::uint64_t n = r.u64();
  tracks_.clear();
  deadlines_.clear();
  for (std::uint64_t i = 0; i < n && !r.failed(); ++i) {
    r.expect("silence_series");
    std::string id = r.str();
    Track t;
    t.last = TimePoint{Seconds{r.i64()}};
    t.silent = r.boolean();
    const bool has_deadline = r.boolean();
    const std::int64_t deadline = r.i64();
    t.usual_seconds = r.i64();
    const std::uint64_t gaps = r.u64();
    if (gaps > 1000) r.fail(fmt::format("series '{}' has {} silence gaps saved, at most 1000 are kept", id, gaps));
    for (std::uint64_t k = 0; k < gaps && !r.failed(); ++k) t.gaps.push_back(r.i64());
    if (r.failed()) break;
    if (id.empty() || tracks_.count(id)) {
      r.fail(fmt::format("silence state of series '{}' is empty or repeated", id));
      break;
    }
    if (has_deadline) {
      t.deadline = TimePoint{Seconds{deadline}};
      deadlines_.emplace(*t.deadline, id);
    }
    tracks_.emplace(std::move(id), std::move(t));
  }
}

}  // namespace tallyd::detect
