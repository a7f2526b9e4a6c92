// SVG pictures for the report, built as strings (no DOM, no fonts needed
// beyond a generic sans-serif). Colours are the Okabe-Ito palette (Okabe &
// Ito 2008, "Color Universal Design"), distinguishable with the common
// colour-vision deficiencies; alerts differ by marker shape as well as colour.
// Every picture has labelled axes with units; time axes show UTC dates.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "report/trace.h"
#include "tune/episodes.h"
#include "tune/recommend.h"

namespace tallyd::report {

// Okabe-Ito colours as used here.
inline constexpr const char* kInk = "#000000";         // observed counts, axes
inline constexpr const char* kExpected = "#0072B2";    // blue: expected line
inline constexpr const char* kBand = "#56B4E9";        // sky blue: predictive band (translucent)
inline constexpr const char* kHigh = "#D55E00";        // vermillion: high alerts (upward triangle)
inline constexpr const char* kLow = "#009E73";         // bluish green: low alerts (downward triangle)
inline constexpr const char* kEpisode = "#E69F00";     // orange: known episodes (translucent)
inline constexpr const char* kExposure = "#CC79A7";    // reddish purple: exposure strip

// One series: observed counts, expected line, predictive band, alerts,
// episodes of this series, and an exposure strip below when exposure varies.
// Long series are binned to one column per pixel (min-max of counts, widest
// band, mean expected); alerts are always drawn one by one. Standalone SVG
// with an xmlns (renders alone or inline). Empty traces give a small
// "no records" picture.
std::string series_plot_svg(const SeriesTrace& t, const std::vector<tune::Episode>& episodes, int width = 760);

// A small line of the counts with alert ticks, for the overview table.
std::string sparkline_svg(const SeriesTrace& t, int width = 180, int height = 30);

// The tuning trade-off: false alerts per series-year (x, log scale) against
// the fraction of episodes detected (y), one line per model setting across
// alpha, the budget as a vertical line and the chosen row ringed.
std::string tradeoff_svg(const std::vector<tune::TuneRow>& rows, std::optional<std::size_t> chosen,
                         double max_false_per_year, int width = 640, int height = 360);

// Tick positions for a UTC time axis between `from` and `to`: at most about
// `max_ticks` round dates (hours, days, weeks, month or year starts) with
// labels such as "2025-06", "2025-06-14", "06-14 12:00".
struct TimeTick {
  TimePoint time;
  std::string label;
};
std::vector<TimeTick> time_ticks(TimePoint from, TimePoint to, int max_ticks);

// Round tick values covering [0, top] (1, 2, 5 x 10^k steps), at most about `max_ticks`.
std::vector<double> value_ticks(double top, int max_ticks);

// Text safe for HTML/SVG element content and attribute values.
std::string escape_xml(std::string_view text);

}  // namespace tallyd::report
