// What model a series gets and how its counts are judged: the options that a
// config fills in (config/ is the only place that reads TOML).
#pragma once

#include <cstddef>
#include <cstdint>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "bounds/predictive.h"
#include "core/time.h"
#include "detect/detect_spec.h"
#include "glm/family.h"

namespace tallyd {

// One periodic component of the linear predictor: `harmonics` sin/cos pairs
// of the given period, phased on absolute (UTC epoch) time so that every
// series shares the same calendar.
struct Season {
  Seconds period{};   // e.g. 365.25 days, 7 days, 1 day
  int harmonics = 1;  // number of sin/cos pairs, >= 1
};

// How much history a series keeps for training. Both limits apply when set.
struct Window {
  std::optional<Seconds> span;           // keep records newer than (latest - span)
  std::optional<std::size_t> records;    // keep at most this many records
};

struct ModelSpec {
  glm::Family family = glm::Family::quasipoisson;  // overdispersion is the norm in field counts (common practice)
  glm::Link link = glm::Link::log;
  bool trend = false;                    // linear term in years since the series' first accepted record
  std::vector<Season> seasons;           // Fourier terms
  std::vector<std::string> covariates;   // feed columns used as covariates, in design order
  Window window{Seconds{static_cast<std::int64_t>(2 * kDaysPerYear * kSecondsPerDay)}, 1000};
  std::size_t min_history = 20;          // records before any judgement (raised to #coefficients + 2)
  std::size_t refit_every = 1;           // refit after this many new records (1 = every record)
  bool refit_on_doubt = false;           // with refit_every > 1: refit before judging a record whose
                                         // p-values under the older fit are not both above
                                         // doubt_factor * alpha (engine/engine.h), so only records
                                         // far inside their bounds are judged by a fit a few records old
  double doubt_factor = 10;              // refit_on_doubt's margin over alpha, 1-1e6 (larger: more refits)
  std::size_t cadence_from = 0;          // with refit_every > 1: refit after every record while the window
                                         // holds fewer records than this (a young series' fit moves fast)
  bool step_between_refits = false;      // log link, with refit_every > 1: after every record that is not a
                                         // full refit, move the fit by one Newton step on the current window
                                         // from the last full refit (series/window_step.h)
  // Outbreak-resistant training (docs/detection.md). After each fit, records
  // whose standardized Anscombe residual exceeds reweight_threshold get
  // prior weight proportional to residual^-2 and the model is refitted once
  // (Farrington et al. 1996 with the threshold of Noufaily et al. 2013).
  bool reweight = true;                  // down-weight outlying records in each refit
  double reweight_threshold = 2.58;      // standardized Anscombe residual above which a record is down-weighted
  std::size_t reweight_rounds = 1;       // reweighted refits at most, each against the previous one (1-10)
  bool reweight_mean_correction = false; // log link: divide the resistant fit's mean by its expected shrinkage
  double alerted_weight = 1.0;           // prior weight of a record that raised an alert, in [0, 1] (1 = no change)
  std::size_t guard_records = 0;         // newest records left out of the fit that judges the next record (0 = none)
};

enum class Direction { high, low, both };
std::string_view to_string(Direction d);
std::optional<Direction> parse_direction(std::string_view text);  // "high", "low", "both"

struct AlertSpec {
  double alpha = 0.001;                 // one-sided tail probability for each bound, in (0, 0.5)
  Direction direction = Direction::both;
  bounds::Method method = bounds::Method::quadrature;
  int draws = 10000;                    // simulate: draws per record
  int quadrature_nodes = 48;            // quadrature: Gauss-Hermite nodes
  int grid_node_limit = bounds::kDefaultGridNodeLimit;  // quadrature: bounds::Options::grid_node_limit (0 or 64-16384)
  std::uint64_t seed = 1;               // simulate: base seed of the reproducible draws
  bool screen = false;                  // settle unremarkable records before the full bounds (bounds::Options::screen)
  // Judged records in a row without an alert in an open episode's direction
  // that close that episode (alert/episode_tracker.h); 1-10000.
  std::uint32_t episode_close_records = 3;
};

// Everything that governs one series.
struct SeriesSettings {
  ModelSpec model;
  AlertSpec alert;
  DetectSpec detect;  // shift CUSUM and low-count run (detect/detect_spec.h)
};

// Rules that pick settings by series id: the first rule whose glob matches
// wins, else the defaults. Globs use '*' (any run) and '?' (one character).
struct SettingsRule {
  std::string match;
  SeriesSettings settings;
};

struct SettingsTable {
  SeriesSettings defaults;
  std::vector<SettingsRule> rules;

  const SeriesSettings& for_series(std::string_view series) const;
};

// Shell-style glob match of `text` against `pattern` ('*' and '?').
bool glob_match(std::string_view pattern, std::string_view text);

}  // namespace tallyd
