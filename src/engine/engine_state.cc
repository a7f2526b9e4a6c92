// Saving and restoring the whole engine: counters, then each series in id order.
#include <fmt/format.h>

#include "core/state_codec.h"
#include "engine/engine.h"

namespace tallyd {

void Engine::save_state(StateWriter& w) const {
  w.tag("engine");
  for (std::uint64_t v : {counters_.records, counters_.judged, counters_.warming_up, counters_.alerts_high,
                          counters_.alerts_low})
    w.u64(v);
  w.u64(kRejectReasonCount);
  for (std::uint64_t v : counters_.rejected.by_reason) w.u64(v);
  w.u64(series_.size());
  w.newline();
  for (const auto& [id, model] : series_) {
    w.tag("series");
    w.str(id);
    w.newline();
    model->save_state(w);
  }
}

void Engine::load_state(StateReader& r) {
  r.expect("engine");
  counters_.records = r.u64();
  counters_.judged = r.u64();
  counters_.warming_up = r.u64();
  counters_.alerts_high = r.u64();
  counters_.alerts_low = r.u64();
  const std::uint64_t reasons = r.u64();
  if (!r.failed() && reasons != kRejectReasonCount)
    r.fail(fmt::format("{} rejection reasons saved, this build knows {}", reasons, kRejectReasonCount));
  for (std::size_t i = 0; i < kRejectReasonCount && !r.failed(); ++i) counters_.rejected.by_reason[i] = r.u64();
  const std::uint64_t n = r.u64();
  series_.clear();
  for (std::uint64_t i = 0; i < n && !r.failed(); ++i) {
    r.expect("series");
    std::string id = r.str();
    if (r.failed()) break;
    if (id.empty() || series_.count(id)) {
      r.fail(fmt::format("series id '{}' is empty or repeated", id));
      break;
    }
    auto model = std::make_unique<SeriesModel>(id, settings_->for_series(id));
    model->load_state(r);
    series_.emplace(std::move(id), std::move(model));
  }
}

}  // namespace tallyd
