#include "engine/engine.h"

#include <cmath>

#include <fmt/format.h>

namespace tallyd {

Engine::Engine(const SettingsTable& settings, EngineLimits limits, detect::FdrSpec fdr)
    : settings_(&settings), limits_(limits), fdr_(fdr), hold_(limits.arrival, limits.max_series) {}

void Engine::count_released(const std::vector<Alert>& alerts) {
  for (const Alert& a : alerts) {
    ++(a.side == AlertSide::high ? counters_.alerts_high : counters_.alerts_low);
    ++counters_.alerts_fdr;
  }
}

std::vector<Alert> Engine::flush() {
  if (!fdr_.enabled) return {};
  std::vector<Alert> out = detect::fdr_close(fdr_state_, fdr_);
  count_released(out);
  for (Alert& a : out) episodes_.on_alert(a);
  return out;
}

const SeriesModel* Engine::find(const std::string& series) const {
  auto it = series_.find(series);
  return it == series_.end() ? nullptr : it->second.get();
}

const detect::DetectorState* Engine::detector_state(const std::string& series) const {
  auto it = detectors_.find(series);
  return it == detectors_.end() ? nullptr : &it->second;
}

IngestResult Engine::reject(const Observation& obs, RejectReason reason, std::string detail) {
  counters_.rejected.add(reason);
  IngestResult r;
  r.kind = IngestResult::Kind::rejected;
  r.rejection = Rejection{reason, obs.where, std::move(detail)};
  return r;
}

void Engine::track(IngestResult& r, const Observation& obs, std::uint32_t close_after) {
  for (Alert& a : r.released) episodes_.on_alert(a);
  if (r.kind != IngestResult::Kind::judged) return;
  std::vector<AlertSide> alerted;
  if (r.alert) {
    episodes_.on_alert(*r.alert);
    alerted.push_back(r.alert->side);
  }
  for (Alert& a : r.detector_alerts) {
    episodes_.on_alert(a);
    alerted.push_back(a.side);
  }
  // With [fdr] on, this record's own bound decision waits for its step: it
  // counts as quiet here, and a bound_fdr alert released later opens or
  // continues an episode when it comes.
  episodes_.on_judged(obs.series, obs.time, alerted, close_after, r.closed);
}

IngestResult Engine::ingest(const Observation& obs) {
  ++counters_.records;
  // Parsers already refuse these; the engine checks again because it is also
  // fed directly (tests, sockets) and must never learn from them.
  if (obs.series.empty()) return reject(obs, RejectReason::bad_series, "series id is empty");
  if (obs.count < 0) return reject(obs, RejectReason::bad_count, fmt::format("count {} is negative", obs.count));
  if (!std::isfinite(obs.exposure) || obs.exposure < 0)
    return reject(obs, RejectReason::bad_exposure, fmt::format("exposure {} is not a positive number", obs.exposure));
  if (obs.exposure == 0)
    return reject(obs, RejectReason::zero_exposure, "exposure is 0: no effort, record skipped");

  auto it = series_.find(obs.series);
  if (it == series_.end()) {
    if (series_.size() >= limits_.max_series)
      return reject(obs, RejectReason::too_many_series,
                    fmt::format("series '{}' would exceed the limit of {} series", obs.series, limits_.max_series));
    const SeriesSettings& s = settings_->for_series(obs.series);
    it = series_.emplace(obs.series, std::make_unique<SeriesModel>(obs.series, s)).first;
  }
  SeriesModel& model = *it->second;

  if (auto missing = model.missing_covariate(obs))
    return reject(obs, RejectReason::missing_covariate,
                  fmt::format("series '{}' needs covariate '{}', which the record lacks", obs.series, *missing));
  if (auto last = model.last_time(); last && obs.time <= *last)
    return reject(obs, RejectReason::out_of_order,
                  fmt::format("time {} is not after the series' newest record {}", format_time(obs.time),
                              format_time(*last)));

  IngestResult r;
  bool bound_alerted = false;
  if (model.ready()) {
    // Judge before learning: the count must not widen its own interval.
    r.kind = IngestResult::Kind::judged;
    const SeriesSettings& s = model.settings();
    // The screen leaves out integer bounds and exact p-values; the control
    // across series needs every p-value, and a simulated shift CUSUM needs
    // the draws' mean, so neither may use it.
    const bool screen = !full_bounds_ && !fdr_.enabled &&
                        !(s.alert.method == bounds::Method::simulate && s.detect.shift);
    r.prediction = model.predict(obs, screen);
    if (s.model.refit_on_doubt && model.records_since_refit() > 0) {
      // The fit lags the newest records (refit_every > 1). Keep its verdict
      // only for a record far inside its bounds; otherwise catch up first,
      // so every record near alpha is judged by a fit of all earlier records.
      const bounds::Bounds& b = r.prediction->bounds;
      const double clear = s.model.doubt_factor * s.alert.alpha;
      // A deferred record (bounds::Bounds) is one the draws left for this.
      if (b.deferred || !(b.p_high > clear && b.p_low > clear)) {
        model.refit(RefitCause::doubt);
        r.prediction = model.predict(obs, screen);
      }
    }
    r.alert = judge_count(obs, r.prediction->bounds, model.settings().alert);
    ++counters_.judged;
    if (fdr_.enabled) {
      // Decided per time step across series; the per-record verdict above
      // still governs alerted_weight, so learning does not wait for the step.
      bound_alerted = r.alert.has_value();
      r.alert.reset();
      r.released = detect::fdr_offer(fdr_state_, fdr_, detect::fdr_candidate(obs, r.prediction->bounds,
                                                                              model.settings().alert),
                                     series_.size());
      count_released(r.released);
    }
    if (r.alert) ++(r.alert->side == AlertSide::high ? counters_.alerts_high : counters_.alerts_low);
    if (s.detect.shift || s.detect.low_run) {
      detect::DetectorState& state = detectors_[obs.series];
      const detect::DetectorState before = state;
      // The dispersion's residual df lets the CUSUM's limit allow for phi's estimation error.
      const double df = model.has_fit() ? model.fit().df_residual : 0;
      r.detector_alerts = detect::run_detectors(state, obs, *r.prediction, s, limits_table_, df);
      if (!r.detector_alerts.empty() && r.prediction->bounds.screened) {
        // A detector alert shows the record's bounds: compute them and run the
        // detectors again from the same state (they read only the mean and
        // the noise, which the screen leaves as they are, so they decide the same).
        state = before;
        r.prediction = model.predict(obs, false);
        r.detector_alerts = detect::run_detectors(state, obs, *r.prediction, s, limits_table_, df);
      }
      for (const Alert& a : r.detector_alerts) {
        ++(a.side == AlertSide::high ? counters_.alerts_high : counters_.alerts_low);
        ++(a.detector == detect::kShiftLabel ? counters_.alerts_shift : counters_.alerts_low_run);
      }
    }
  } else {
    r.kind = IngestResult::Kind::warming_up;
    ++counters_.warming_up;
    if (fdr_.enabled) {
      r.released = detect::fdr_tick(fdr_state_, fdr_, obs.time);
      count_released(r.released);
    }
  }
  // A record that raised any alert may enter training with a reduced weight
  // (model.alerted_weight), so an outbreak does not become its own baseline.
  const bool alerted = bound_alerted || r.alert || !r.detector_alerts.empty();
  model.learn(obs, alerted ? model.settings().model.alerted_weight : 1.0);
  if (model.settings().detect.silence) {
    r.recovery = silence_.report(obs, model.settings().detect);
    if (r.recovery) ++counters_.silence_ends;
  }
  track(r, obs, model.settings().alert.episode_close_records);
  return r;
}

}  // namespace tallyd
