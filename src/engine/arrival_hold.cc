#include "engine/arrival_hold.h"

#include <fmt/format.h>

#include "core/state_codec.h"

namespace tallyd {

ArrivalHold::Verdict ArrivalHold::offer(const Observation& obs, std::vector<Observation>& ready,
                                        std::optional<Rejection>& rejection) {
  if (!active()) {
    ready.push_back(obs);
    return Verdict::passed;
  }
  const Seconds tol = spec_.late_tolerance;
  auto refuse = [&](RejectReason reason, std::string detail) {
    rejection = Rejection{reason, obs.where, std::move(detail)};
    return Verdict::refused;
  };
  auto found = series_.find(obs.series);
  Verdict verdict = Verdict::held;
  if (found != series_.end()) {
    SeriesHold& s = found->second;
    if (obs.time < s.newest - tol)
      return refuse(RejectReason::too_late,
                    fmt::format("series '{}': time {} is older than the series' newest record {} by more than the "
                                "late tolerance {}",
                                obs.series, format_time(obs.time), format_time(s.newest), format_duration(tol)));
    if (s.released.count(obs.time))
      return refuse(RejectReason::duplicate_time,
                    fmt::format("series '{}': a record for time {} has already been judged (newest {})", obs.series,
                                format_time(obs.time), format_time(s.newest)));
    if (!s.released.empty() && obs.time < *s.released.rbegin())
      return refuse(RejectReason::too_late,
                    fmt::format("series '{}': time {} comes after the series was judged up to {} (newest {})",
                                obs.series, format_time(obs.time), format_time(*s.released.rbegin()),
                                format_time(s.newest)));
    if (auto h = s.held.find(obs.time); h != s.held.end()) {
      if (spec_.duplicates == DuplicatePolicy::refuse)
        return refuse(RejectReason::duplicate_time,
                      fmt::format("series '{}': a record for time {} is already waiting to be judged (newest {}); "
                                  "arrival.duplicates is \"refuse\"",
                                  obs.series, format_time(obs.time), format_time(s.newest)));
      h->second = obs;
      verdict = Verdict::replaced;
    }
  } else {
    if (series_.size() >= max_series_)
      return refuse(RejectReason::too_many_series,
                    fmt::format("series '{}' would exceed the limit of {} series", obs.series, max_series_));
    found = series_.emplace(obs.series, SeriesHold{obs.time, {}, {}}).first;
  }
  SeriesHold& s = found->second;
  if (verdict == Verdict::held) {
    s.held.emplace(obs.time, obs);
    order_.emplace(obs.time, obs.series);
  }
  if (obs.time > s.newest) {
    s.newest = obs.time;
    // Released times this old can no longer be matched: a record that old is too late anyway.
    while (!s.released.empty() && *s.released.begin() < s.newest - tol) s.released.erase(s.released.begin());
  }
  tick(obs.time, ready);
  if (order_.size() > spec_.max_held) release_until(order_.begin()->first, ready);
  return verdict;
}

void ArrivalHold::tick(TimePoint now, std::vector<Observation>& ready) {
  if (!active()) return;
  if (!clock_ || now > *clock_) clock_ = now;
  release_until(*clock_ - spec_.late_tolerance, ready);
}

void ArrivalHold::drain(std::vector<Observation>& ready) { release_until(TimePoint::max(), ready); }

std::optional<TimePoint> ArrivalHold::released_through() const {
  if (!active() || !clock_) return std::nullopt;
  return *clock_ - spec_.late_tolerance;
}

void ArrivalHold::release_until(TimePoint through, std::vector<Observation>& ready) {
  while (!order_.empty() && order_.begin()->first <= through) {
    const auto [time, series] = *order_.begin();
    order_.erase(order_.begin());
    SeriesHold& s = series_.at(series);
    auto h = s.held.find(time);
    ready.push_back(std::move(h->second));
    s.held.erase(h);
    s.released.insert(time);
    // Only the newest release and those inside the tolerance window are needed later.
    while (s.released.size() > 1 && *s.released.begin() < s.newest - spec_.late_tolerance)
      s.released.erase(s.released.begin());
  }
}

namespace {

void save_observation(StateWriter& w, const Observation& o) {
  w.tag("held");
  w.i64(o.time.time_since_epoch().count());
  w.str(o.series);
  w.i64(o.count);
  w.f64(o.exposure);
  w.str(o.where.source);
  w.u64(o.where.line);
  w.u64(o.covariates.size());
  for (const Covariate& c : o.covariates) {
    w.str(c.name);
    w.f64(c.value);
  }
  w.newline();
}

Observation load_observation(StateReader& r) {
  Observation o;
  r.expect("held");
  o.time = TimePoint{Seconds{r.i64()}};
  o.series = r.str();
  o.count = r.i64();
  o.exposure = r.f64();
  o.where.source = r.str();
  o.where.line = r.u64();
  const std::uint64_t n = r.u64();
  if (n > 10000) r.fail("a held record with more than 10000 covariates");
  for (std::uint64_t i = 0; i < n && !r.failed(); ++i) {
    Covariate c;
    c.name = r.str();
    c.value = r.f64();
    o.covariates.push_back(std::move(c));
  }
  return o;
}

}  // namespace

void ArrivalHold::save_state(StateWriter& w) const {
  w.tag("arrival");
  w.boolean(clock_.has_value());
  w.i64(clock_ ? clock_->time_since_epoch().count() : 0);
  w.u64(series_.size());
  w.newline();
  for (const auto& [id, s] : series_) {
    w.tag("arrival_series");
    w.str(id);
    w.i64(s.newest.time_since_epoch().count());
    w.u64(s.released.size());
    for (TimePoint t : s.released) w.i64(t.time_since_epoch().count());
    w.u64(s.held.size());
    w.newline();
    for (const auto& [time, obs] : s.held) save_observation(w, obs);
  }
}

void ArrivalHold::load_state(StateReader& r) {
  r.expect("arrival");
  const bool has_clock = r.boolean();
  const std::int64_t clock = r.i64();
  clock_ = has_clock ? std::optional<TimePoint>(TimePoint{Seconds{clock}}) : std::nullopt;
  const std::uint64_t n = r.u64();
  series_.clear();
  order_.clear();
  for (std::uint64_t i = 0; i < n && !r.failed(); ++i) {
    r.expect("arrival_series");
    std::string id = r.str();
    SeriesHold s;
    s.newest = TimePoint{Seconds{r.i64()}};
    const std::uint64_t released = r.u64();
    for (std::uint64_t k = 0; k < released && !r.failed(); ++k) s.released.insert(TimePoint{Seconds{r.i64()}});
    const std::uint64_t held = r.u64();
    for (std::uint64_t k = 0; k < held && !r.failed(); ++k) {
      Observation o = load_observation(r);
      if (r.failed()) break;
      if (o.series != id || s.held.count(o.time)) {
        r.fail(fmt::format("held record of series '{}' at {} is misfiled or repeated", o.series, format_time(o.time)));
        break;
      }
      order_.emplace(o.time, id);
      s.held.emplace(o.time, std::move(o));
    }
    if (r.failed()) break;
    if (id.empty() || series_.count(id)) {
      r.fail(fmt::format("arrival state of series '{}' is empty or repeated", id));
      break;
    }
    series_.emplace(std::move(id), std::move(s));
  }
}

}  // namespace tallyd
