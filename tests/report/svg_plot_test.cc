#include "report/svg_plot.h"

#include <catch2/catch.hpp>

using namespace tallyd;
using namespace tallyd::report;

namespace {
std::size_t occurrences(const std::string& text, const std::string& what) {
  std::size_t n = 0;
  for (std::size_t p = text.find(what); p != std::string::npos; p = text.find(what, p + 1)) ++n;
  return n;
}

SeriesTrace trace(int n, int step_seconds, bool vary_exposure) {
  SeriesTrace t;
  t.id = "trap<1>";
  const TimePoint t0 = parse_time("2024-03-15T06:00:00Z").value();
  for (int i = 0; i < n; ++i) {
    TracePoint p;
    p.time = t0 + Seconds{static_cast<long long>(i) * step_seconds};
    p.count = i % 7;
    p.exposure = vary_exposure ? 1 + i % 3 : 1;
    p.judged = i >= 10;
    p.expected = 3;
    p.lower = 0;
    p.upper = 9;
    p.flag = (i == 20) ? 1 : (i == 30 ? -1 : 0);
    t.points.push_back(p);
  }
  return t;
}
}  // namespace

TEST_CASE("time ticks fall on round calendar dates", "[report]") {
  const auto ticks = time_ticks(parse_time("2023-03-10T00:00:00Z").value(), parse_time("2025-11-20T00:00:00Z").value(), 8);
  REQUIRE(!ticks.empty());
  CHECK(ticks.size() <= 8);
  for (const TimeTick& t : ticks) CHECK(format_time(t.time).substr(4) .find("-01T00:00:00Z") != std::string::npos);
  const auto days = time_ticks(parse_time("2025-07-10T00:00:00Z").value(), parse_time("2025-07-20T00:00:00Z").value(), 8);
  REQUIRE(!days.empty());
  // 10 days at most 8 ticks: every second day (epoch-aligned), at midnight, labelled by date.
  CHECK(days.size() == 5);
  CHECK(days.front().label == format_time(days.front().time).substr(0, 10));
  CHECK(format_time(days.front().time).substr(10) == "T00:00:00Z");
  const auto hours = time_ticks(parse_time("2025-07-10T13:00:00Z").value(), parse_time("2025-07-10T20:00:00Z").value(), 8);
  REQUIRE(!hours.empty());
  CHECK(hours.front().label == "07-10 14:00");
}

TEST_CASE("value ticks are round and cover the top", "[report]") {
  CHECK(value_ticks(10, 5) == std::vector<double>{0, 2, 4, 6, 8, 10});
  CHECK(value_ticks(0, 5) == std::vector<double>{0});
  CHECK(value_ticks(470, 5).back() == 400);
}

TEST_CASE("series plot: one marker per alert, episode shading, exposure strip when it varies", "[report]") {
  const std::vector<tune::Episode> eps{{"trap<1>", parse_time("2024-03-16T00:00:00Z").value(),
                                        parse_time("2024-03-17T00:00:00Z").value()},
                                       {"other", parse_time("2024-03-16T00:00:00Z").value(),
                                        parse_time("2024-03-17T00:00:00Z").value()}};
  const std::string svg = series_plot_svg(trace(100, 3600, true), eps);
  CHECK(svg.rfind("<svg xmlns='http://www.w3.org/2000/svg'", 0) == 0);
  CHECK(occurrences(svg, " high alert: count") == 1);
  CHECK(occurrences(svg, " low alert: count") == 1);
  CHECK(occurrences(svg, "known episode") == 1);  // the other series' episode is not drawn
  CHECK(svg.find("exposure per record") != std::string::npos);
  CHECK(svg.find("trap&lt;1&gt;") != std::string::npos);
  CHECK(svg.find("trap<1>") == std::string::npos);
  CHECK(svg.find("time (UTC)") != std::string::npos);
  CHECK(series_plot_svg(trace(100, 3600, false), eps).find("exposure per record") == std::string::npos);
}

TEST_CASE("long series are binned to pixel columns", "[report]") {
  const std::string small = series_plot_svg(trace(1000, 600, false), {});
  const std::string big = series_plot_svg(trace(50000, 600, false), {});
  // 50 times the records, far less than 50 times the picture; alerts still drawn.
  CHECK(big.size() < small.size() * 3);
  CHECK(occurrences(big, " high alert: count") == 1);
}
