// Ranking tuning rows, choosing one under a false-alarm budget, and writing
// the rows (CSV, JSON) and the chosen setting (a TOML snippet).
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "tune/grid.h"
#include "tune/scoring.h"

namespace tallyd::tune {

struct TuneRow {
  ModelVariant variant;
  Score score;
};

// Sorts best first: rows within `max_false_per_year` (false alerts per
// series-year, NaN counts as within) before the rest; then higher episode
// detection, higher fraction of episode records alerted, shorter median
// delay, fewer false alerts per series-year, larger alpha (more sensitive).
// NaN figures rank last in their key. Stable: ties keep grid order.
void rank_rows(std::vector<TuneRow>& rows, double max_false_per_year);

// True when the row honours the budget (its rate is <= the budget, or NaN
// because nothing was judged).
bool within_budget(const TuneRow& row, double max_false_per_year);

// The first row of a ranked list if it honours the budget, else nullopt.
std::optional<std::size_t> choose_row(const std::vector<TuneRow>& ranked, double max_false_per_year);

// CSV with a header row; one line per row, in the given order. Columns:
// rank,family,window,harmonics,alpha,judged,alerts,false_alerts,series_years,
// false_per_series_year,episodes_listed,episodes_judged,episodes_hit,detection,
// delay_median_days,delay_p90_days,episode_records,episode_records_alerted,
// episode_record_fraction,within_budget. Empty cell = as configured / NaN.
std::string rows_csv(const std::vector<TuneRow>& rows, double max_false_per_year);

// A JSON document {"max_false_per_series_year":..,"chosen":index|null,"rows":[{...}]}
// with the same fields as the CSV.
std::string rows_json(const std::vector<TuneRow>& rows, double max_false_per_year, std::optional<std::size_t> chosen);

// A terminal table of the first `limit` rows.
std::string rows_table(const std::vector<TuneRow>& rows, double max_false_per_year, std::size_t limit);

// TOML lines to merge into the config for the chosen row, with comments
// saying what the tuning saw.
std::string config_snippet(const TuneRow& row, double max_false_per_year);

}  // namespace tallyd::tune
