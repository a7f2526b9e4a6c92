#include "alert/episode_tracker.h"

#include <algorithm>

#include <fmt/format.h>

#include "core/state_codec.h"

namespace tallyd {

std::string EpisodeTracker::make_id(const std::string& series, AlertSide side, std::uint64_t n) {
  return fmt::format("{}/{}/{}", series, to_string(side), n);
}

void EpisodeTracker::on_alert(Alert& a) {
  Slot& s = slots_[{a.series, a.side}];
  if (!s.open) {
    s.open = true;
    ++s.episodes;
    s.opened = a.time;
    s.alerts = 0;
    ++open_;
    ++totals_.opened;
    a.episode = EpisodeTag{make_id(a.series, a.side, s.episodes), EpisodeStep::opened};
  } else {
    a.episode = EpisodeTag{make_id(a.series, a.side, s.episodes), EpisodeStep::continued};
  }
  // A released Benjamini-Hochberg alert can be older than the episode's
  // latest alert; the episode still spans its first to its latest alert time.
  s.last_alert = s.alerts == 0 ? a.time : std::max(s.last_alert, a.time);
  ++s.alerts;
  s.quiet = 0;
}

void EpisodeTracker::on_judged(const std::string& series, TimePoint time, const std::vector<AlertSide>& alerted,
                               std::uint32_t close_after, std::vector<EpisodeEnd>& closed) {
  if (open_ == 0) return;
  close_after = std::max<std::uint32_t>(close_after, 1);
  for (auto it = slots_.lower_bound({series, AlertSide{}}); it != slots_.end() && it->first.first == series; ++it) {
    Slot& s = it->second;
    const AlertSide side = it->first.second;
    if (!s.open || std::find(alerted.begin(), alerted.end(), side) != alerted.end()) continue;
    if (++s.quiet < close_after) continue;
    closed.push_back(EpisodeEnd{make_id(series, side, s.episodes), series, side, s.opened, s.last_alert, time,
                                s.alerts, s.quiet});
    s.open = false;
    s.quiet = 0;
    --open_;
    ++totals_.closed;
  }
}

std::string EpisodeTracker::open_id(const std::string& series, AlertSide side) const {
  auto it = slots_.find({series, side});
  if (it == slots_.end() || !it->second.open) return "";
  return make_id(series, side, it->second.episodes);
}

void EpisodeTracker::save_state(StateWriter& w) const {
  w.tag("episodes");
  w.u64(totals_.opened);
  w.u64(totals_.closed);
  w.u64(slots_.size());
  w.newline();
  for (const auto& [key, s] : slots_) {
    w.tag("episode");
    w.str(key.first);
    w.str(to_string(key.second));
    w.u64(s.episodes);
    w.boolean(s.open);
    w.i64(s.opened.time_since_epoch().count());
    w.i64(s.last_alert.time_since_epoch().count());
    w.u64(s.alerts);
    w.u64(s.quiet);
    w.newline();
  }
}

void EpisodeTracker::load_state(StateReader& r) {
  slots_.clear();
  open_ = 0;
  r.expect("episodes");
  totals_.opened = r.u64();
  totals_.closed = r.u64();
  const std::uint64_t n = r.u64();
  for (std::uint64_t i = 0; i < n && !r.failed(); ++i) {
    r.expect("episode");
    std::string series = r.str();
    const std::string side_word = r.str();
    Slot s;
    s.episodes = r.u64();
    s.open = r.boolean();
    s.opened = TimePoint{Seconds{r.i64()}};
    s.last_alert = TimePoint{Seconds{r.i64()}};
    s.alerts = r.u64();
    s.quiet = static_cast<std::uint32_t>(r.u64());
    if (r.failed()) break;
    AlertSide side = AlertSide::high;
    if (side_word == to_string(AlertSide::low)) side = AlertSide::low;
    else if (side_word != to_string(AlertSide::high)) r.fail(fmt::format("episode direction '{}' is unknown", side_word));
    if (s.open && s.episodes == 0) r.fail(fmt::format("open episode of series '{}' has no number", series));
    if (r.failed()) break;
    if (!slots_.emplace(std::pair{std::move(series), side}, s).second) {
      r.fail("an episode slot is repeated");
      break;
    }
    if (s.open) ++open_;
  }
}

}  // namespace tallyd
