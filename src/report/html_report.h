// The report: one self-contained HTML file (inline SVG, inline CSS and a
// small script; nothing fetched from the network) for people to look at a
// replay or a tuning run.
//
// Layout: a heading and the caution; for tuning, the trade-off picture and
// the chosen setting; an overview table of every series, most alerts first,
// with a sparkline each; then one panel per series (same order) with its
// plot and fitted coefficients. Each panel's markup is shipped as the raw
// text of a <script type='text/x-panel'> element (not parsed at load) and
// drawn when scrolled near, then the rest in small batches, so a page with
// 1,000 series does not build every plot before it shows. When all are drawn the body carries
// data-panels-drawn="N" and each panel data-drawn="1" (for tests).
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "report/trace.h"
#include "tune/episodes.h"
#include "tune/recommend.h"

namespace tallyd::report {

struct ReportInput {
  std::string title = "tallyd report";
  std::vector<std::string> notes;  // lines under the title: feeds, config, counters
  std::vector<SeriesTrace> series;
  std::vector<tune::Episode> episodes;
  // Tuning only: every row (ranked), the chosen one, the budget.
  const std::vector<tune::TuneRow>* tune_rows = nullptr;
  std::optional<std::size_t> chosen;
  double max_false_per_year = 0;
};

std::string render_report_html(const ReportInput& in);

// The caution every report and snippet carries.
extern const char* const kCaution;

}  // namespace tallyd::report
