// Scoring one alpha against known episodes, from p-values kept once per
// judged record.
//
// Why this is exact for the bound detector: the predictive p-values of a
// record (p_high = P(Y >= count), p_low = P(Y <= count)) depend on the model
// as it was before the record, not on alpha, and the model learns every
// record whatever the verdict. judge_count (alert/alert.h) raises an alert
// iff the series watches the high side and p_high <= alpha, else iff it
// watches the low side and p_low <= alpha. score_alpha applies the very same
// rule, so one replay per model setting scores any number of alphas.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "series/model_spec.h"
#include "tune/episodes.h"

namespace tallyd::tune {

// What tuning keeps of one judged record.
struct JudgedRecord {
  std::uint32_t series = 0;  // index into JudgedLog::series_ids
  TimePoint time;
  double p_high = 1;
  double p_low = 1;
  Direction direction = Direction::both;  // the series' watched side(s)
};

// Every judged record of one replay, in feed (time) order.
struct JudgedLog {
  std::vector<std::string> series_ids;
  std::vector<JudgedRecord> records;
};

// Whether a record is flagged at `alpha`, and on which side: +1 high, -1 low,
// 0 none. Same rule as judge_count.
int flagged_side(const JudgedRecord& r, double alpha);

struct Score {
  double alpha = 0;
  std::uint64_t judged = 0;           // judged records
  std::uint64_t alerts = 0;           // flagged records
  std::uint64_t false_alerts = 0;     // flagged records outside every episode of their series
  double series_years = 0;            // sum over series of (last - first judged time), in years of 365.25 days
  double false_per_series_year = 0;   // false_alerts / series_years; NaN when series_years == 0
  std::uint64_t episodes_listed = 0;  // episodes in the events file
  std::uint64_t episodes_judged = 0;  // episodes containing at least one judged record (the denominator)
  std::uint64_t episodes_hit = 0;     // of those, episodes with at least one alert inside
  double detection = 0;               // episodes_hit / episodes_judged; NaN when episodes_judged == 0
  double delay_median_days = 0;       // from episode start to first alert inside, over hit episodes; NaN if none
  double delay_p90_days = 0;          // 90th percentile of the same (type-7 quantile, as R's default)
  std::uint64_t episode_records = 0;  // judged records inside an episode
  std::uint64_t episode_records_alerted = 0;
  double episode_record_fraction = 0; // episode_records_alerted / episode_records; NaN when 0
};

// Scores `alpha` on `log` against `episodes`. Episodes of series absent from
// the log count as listed but not judged. Overlapping episodes of one series
// are scored each on its own.
Score score_alpha(const JudgedLog& log, const std::vector<Episode>& episodes, double alpha);

// Type-7 sample quantile (linear interpolation between order statistics,
// R's default), p in [0, 1]; NaN for an empty sample. Sorts `values`.
double quantile7(std::vector<double>& values, double p);

}  // namespace tallyd::tune
