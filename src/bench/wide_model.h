// The model the memory and restore benchmarks hold per series: quasi-Poisson,
// log link, trend, two annual and one weekly harmonic pairs (8
// coefficients), a window of `window` records that refits only once it is
// full, so the figures measure the state a series keeps, not fitting.
#pragma once

#include <cstddef>
#include <optional>

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

}  // namespace tallyd::bench
