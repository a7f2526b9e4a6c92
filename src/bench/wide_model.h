// The model (and feed) the memory and restore benchmarks hold per series: quasi-Poisson,
// log link, trend, two annual and one weekly harmonic pairs (8
// coefficients), a window of `window` records that refits only once it is
// full, so the figures measure the state a series keeps, not fitting.
#pragma once

#include <cstddef>
#include <optional>
#include <string>

#include "bounds/random.h"
#include "core/time.h"
#include "engine/engine.h"
#include "series/model_spec.h"

namespace tallyd::bench {

inline SettingsTable wide_model_settings(long window) {
  SettingsTable settings;
  ModelSpec& m = settings.defaults.model;
  m.family = glm::Family::quasipoisson;
  m.trend = true;
  m.seasons = {Season{Seconds{31557600}, 2}, Season{Seconds{7 * 86400}, 1}};
  m.window = Window{std::nullopt, static_cast<std::size_t>(window)};
  m.min_history = static_cast<std::size_t>(window);
  m.refit_every = static_cast<std::size_t>(window);
  return settings;
}

// Feeds `days` daily records to each of `series` series ("s0", "s1", ...):
// Poisson counts of mean 5-24 by series, exposure 1, from 2024-01-01, the
// same draws in every benchmark that calls it.
inline void feed_daily(Engine& engine, long series, long days) {
  bounds::Rng rng(99);
  const TimePoint start = parse_time("2024-01-01T06:00:00Z").value();
  Observation o;
  for (long d = 0; d < days; ++d) {
    o.time = start + Seconds{d * 86400};
    for (long s = 0; s < series; ++s) {
      o.series = "s" + std::to_string(s);
      o.exposure = 1;
      o.count = rng.poisson(5.0 + static_cast<double>(s % 20));
      engine.ingest(o);
    }
  }
}

}  // namespace tallyd::bench
