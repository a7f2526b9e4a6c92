// Saving and restoring the whole engine: counters, the cross-series
// Benjamini-Hochberg gate, the arrival hold and the silence watch, then each
// series in id order with its detector state, then the episode tracker.
#include <fmt/format.h>

#include "core/state_codec.h"
#include "engine/engine.h"

namespace tallyd {
namespace {

void save_alert(StateWriter& w, const Alert& a) {
  w.tag("alert");
  w.i64(a.time.time_since_epoch().count());
  w.str(a.series);
  w.i64(a.count);
  w.f64(a.exposure);
  w.f64(a.expected);
  w.i64(a.lower);
  w.i64(a.upper);
  w.f64(a.p_value);
  w.f64(a.alpha);
  w.boolean(a.side == AlertSide::low);
  w.str(a.detector);
  w.f64(a.statistic);
  w.newline();
}

Alert load_alert(StateReader& r) {
  Alert a;
  r.expect("alert");
  a.time = TimePoint{Seconds{r.i64()}};
  a.series = r.str();
  a.count = r.i64();
  a.exposure = r.f64();
  a.expected = r.f64();
  a.lower = r.i64();
  a.upper = r.i64();
  a.p_value = r.f64();
  a.alpha = r.f64();
  a.side = r.u64() != 0 ? AlertSide::low : AlertSide::high;
  a.detector = r.str();
  a.statistic = r.f64();
  return a;
}

void save_optional(StateWriter& w, const std::optional<std::int64_t>& v) {
  w.boolean(v.has_value());
  w.i64(v.value_or(0));
}

std::optional<std::int64_t> load_optional(StateReader& r) {
  const bool has = r.u64() != 0;
  const std::int64_t v = r.i64();
  return has ? std::optional<std::int64_t>(v) : std::nullopt;
}

}  // namespace

void Engine::save_state(StateWriter& w) const {
  w.tag("engine");
  for (std::uint64_t v : {counters_.records, counters_.judged, counters_.warming_up, counters_.alerts_high,
                          counters_.alerts_low})
    w.u64(v);
  for (std::uint64_t v : {counters_.alerts_shift, counters_.alerts_low_run, counters_.alerts_fdr}) w.u64(v);
  for (std::uint64_t v : {counters_.alerts_silence, counters_.silence_ends, counters_.duplicates_replaced}) w.u64(v);
  w.u64(kRejectReasonCount);
  for (std::uint64_t v : counters_.rejected.by_reason) w.u64(v);
  w.newline();
  w.tag("fdr");
  save_optional(w, fdr_state_.open_step);
  save_optional(w, fdr_state_.closed_through);
  w.u64(fdr_state_.pending.size());
  w.newline();
  for (const detect::FdrCandidate& c : fdr_state_.pending) save_alert(w, c.alert);
  // Held records were accepted: they are state like the models.
  hold_.save_state(w);
  silence_.save_state(w);
  w.tag("series_count");
  w.u64(series_.size());
  w.newline();
  for (const auto& [id, model] : series_) {
    w.tag("series");
    w.str(id);
    w.newline();
    model->save_state(w);
    // A series gets detector state when first judged; until then it is the default.
    const auto found = detectors_.find(id);
    const detect::DetectorState d = found == detectors_.end() ? detect::DetectorState{} : found->second;
    w.tag("detectors");
    w.f64(d.shift_high);
    w.f64(d.shift_low);
    w.f64(d.run_log_probability);
    w.u64(d.run_records);
    w.newline();
  }
  episodes_.save_state(w);
}

void Engine::load_state(StateReader& r) {
  r.expect("engine");
  counters_.records = r.u64();
  counters_.judged = r.u64();
  counters_.warming_up = r.u64();
  counters_.alerts_high = r.u64();
  counters_.alerts_low = r.u64();
  counters_.alerts_shift = r.u64();
  counters_.alerts_low_run = r.u64();
  counters_.alerts_fdr = r.u64();
  counters_.alerts_silence = r.u64();
  counters_.silence_ends = r.u64();
  counters_.duplicates_replaced = r.u64();
  const std::uint64_t reasons = r.u64();
  if (!r.failed() && reasons != kRejectReasonCount)
    r.fail(fmt::format("{} rejection reasons saved, this build knows {}", reasons, kRejectReasonCount));
  for (std::size_t i = 0; i < kRejectReasonCount && !r.failed(); ++i) counters_.rejected.by_reason[i] = r.u64();
  r.expect("fdr");
  fdr_state_ = detect::FdrState{};
  fdr_state_.open_step = load_optional(r);
  fdr_state_.closed_through = load_optional(r);
  const std::uint64_t pending = r.u64();
  for (std::uint64_t i = 0; i < pending && !r.failed(); ++i) fdr_state_.pending.push_back(detect::FdrCandidate{load_alert(r)});
  hold_ = ArrivalHold(limits_.arrival, limits_.max_series);
  hold_.load_state(r);
  silence_ = detect::SilenceWatch{};
  silence_.load_state(r);
  r.expect("series_count");
  const std::uint64_t n = r.u64();
  // The maps' nodes in the restore's mapping, when the reader offers one.
  series_ = SeriesMap(BulkAllocator<SeriesMap::value_type>(r.memory()));
  detectors_ = DetectorMap(BulkAllocator<DetectorMap::value_type>(r.memory()));
  for (std::uint64_t i = 0; i < n && !r.failed(); ++i) {
    r.expect("series");
    std::string id = r.str();
    if (r.failed()) break;
    // Saved in id order (the map's): each id then goes after the last one,
    // with no search. An id out of order is looked up, as it must not repeat.
    const bool in_order = series_.empty() || series_.rbegin()->first < id;
    if (id.empty() || (!in_order && series_.count(id))) {
      r.fail(fmt::format("series id '{}' is empty or repeated", id));
      break;
    }
    // In the restore's bulk mapping when the reader offers one (series/model_handle.h).
    ModelHandle model = make_model(id, settings_->for_series(id), r.memory());
    model->load_state(r);
    r.expect("detectors");
    detect::DetectorState d;
    d.shift_high = r.f64();
    d.shift_low = r.f64();
    d.run_log_probability = r.f64();
    d.run_records = static_cast<std::uint32_t>(r.u64());
    if (in_order) {
      detectors_.emplace_hint(detectors_.end(), id, d);
      series_.emplace_hint(series_.end(), std::move(id), std::move(model));
    } else {
      detectors_.emplace(id, d);
      series_.emplace(std::move(id), std::move(model));
    }
  }
  episodes_ = EpisodeTracker{};
  if (!r.failed()) episodes_.load_state(r);
}

}  // namespace tallyd
