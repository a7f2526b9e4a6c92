#include "report/html_report.h"

#include <catch2/catch.hpp>

#include <regex>

using namespace tallyd;
using namespace tallyd::report;

namespace {
std::size_t occurrences(const std::string& text, const std::string& what) {
  std::size_t n = 0;
  for (std::size_t p = text.find(what); p != std::string::npos; p = text.find(what, p + 1)) ++n;
  return n;
}
}  // namespace

TEST_CASE("report: one panel per series, most alerts first, self-contained", "[report]") {
  ReportInput in;
  for (int s = 0; s < 5; ++s) {
    SeriesTrace t;
    t.id = "s" + std::to_string(s);
    for (int i = 0; i < 30; ++i) {
      TracePoint p;
      p.time = parse_time("2025-01-01T00:00:00Z").value() + Seconds{86400LL * i};
      p.count = i;
      p.flag = (s == 3 && i > 25) ? 1 : 0;
      t.points.push_back(p);
    }
    t.alerts_high = s == 3 ? 4 : 0;
    t.coefficients.push_back({"intercept", 1.5, 0.1});
    in.series.push_back(t);
  }
  const std::string html = render_report_html(in);
  CHECK(occurrences(html, "<section class='panel'") == 5);
  CHECK(occurrences(html, "<script type='text/x-panel'>") == 5);
  // s3 has the alerts: first row of the overview and first panel.
  CHECK(html.find("<a href='#s0'>s3</a>") != std::string::npos);
  CHECK(html.find(kCaution) != std::string::npos);
  CHECK(html.find("intercept") != std::string::npos);
  // Nothing is fetched: no src= or href= pointing outside the page, no link/import.
  CHECK_FALSE(std::regex_search(html, std::regex("(src|href)\\s*=\\s*['\"]?(https?:)?//")));
  CHECK(html.find("<link") == std::string::npos);
  CHECK(html.find("@import") == std::string::npos);
}
