#include "series/model_spec.h"

#include <cmath>
#include <numbers>

#include <catch2/catch.hpp>

#include "core/time.h"
#include "series/design.h"

using namespace tallyd;

TEST_CASE("glob_match follows shell rules for * and ?", "[series]") {
  CHECK(glob_match("trap-*", "trap-07"));
  CHECK(glob_match("*", ""));
  CHECK(glob_match("t?ap-0*", "trap-07"));
  CHECK(glob_match("*-s*", "orchard-s12"));
  CHECK_FALSE(glob_match("trap-?", "trap-07"));
  CHECK_FALSE(glob_match("orchard-n*", "orchard-s01"));
  CHECK(glob_match("a*b*c", "aXXbYYc"));
  CHECK_FALSE(glob_match("a*b*c", "aXXbYY"));
}

TEST_CASE("the first matching settings rule wins, else the defaults", "[series]") {
  SettingsTable t;
  t.defaults.alert.alpha = 0.001;
  SettingsRule south{"orchard-s*", t.defaults};
  south.settings.alert.alpha = 0.01;
  SettingsRule all{"orchard-*", t.defaults};
  all.settings.alert.alpha = 0.05;
  t.rules = {south, all};
  CHECK(t.for_series("orchard-s01").alert.alpha == 0.01);
  CHECK(t.for_series("orchard-n01").alert.alpha == 0.05);
  CHECK(t.for_series("sensor-1").alert.alpha == 0.001);
}

TEST_CASE("design columns: names, order and exposure handling per link", "[series]") {
  ModelSpec spec;
  spec.trend = true;
  spec.seasons = {Season{Seconds{static_cast<std::int64_t>(kDaysPerYear * kSecondsPerDay)}, 2}};
  spec.covariates = {"temperature_c"};
  const std::vector<std::string> names = coefficient_names(spec);
  REQUIRE(names == std::vector<std::string>{"intercept", "trend", "season_1y_sin1", "season_1y_cos1",
                                            "season_1y_sin2", "season_1y_cos2", "temperature_c"});
  REQUIRE(coefficient_count(spec) == 7);

  auto origin = parse_time("2024-01-01T00:00:00Z").value();
  auto t = parse_time("2025-01-01T06:00:00Z").value();  // 366 days + 6 h later (2024 is a leap year)
  const double temp = 18.5;
  Eigen::RowVectorXd row(7);
  const double offset = design_row(spec, DesignInput{t, origin, 4.0, &temp}, row);
  CHECK(offset == Approx(std::log(4.0)));
  CHECK(row(0) == 1.0);
  CHECK(row(1) == Approx((366.25) / 365.25));
  // Harmonic identities: sin^2 + cos^2 = 1, and the second harmonic doubles the angle.
  CHECK(row(2) * row(2) + row(3) * row(3) == Approx(1.0));
  CHECK(row(4) == Approx(2 * row(2) * row(3)).margin(1e-12));
  CHECK(row(6) == 18.5);

  spec.link = glm::Link::identity;
  Eigen::RowVectorXd scaled(7);
  CHECK(design_row(spec, DesignInput{t, origin, 4.0, &temp}, scaled) == 0.0);
  CHECK(scaled(0) == 4.0);
  CHECK(scaled(6) == Approx(4 * 18.5));
  spec.link = glm::Link::sqrt;
  CHECK(design_row(spec, DesignInput{t, origin, 4.0, &temp}, scaled) == 0.0);
  CHECK(scaled(0) == 2.0);
}

TEST_CASE("seasonal phase depends on absolute time, not on the series origin", "[series]") {
  ModelSpec spec;
  spec.seasons = {Season{Seconds{86400}, 1}};
  auto t = parse_time("2025-03-10T06:00:00Z").value();
  Eigen::RowVectorXd a(3), b(3);
  design_row(spec, DesignInput{t, parse_time("2020-01-01T00:00:00Z").value(), 1.0, nullptr}, a);
  design_row(spec, DesignInput{t, parse_time("2025-03-01T13:17:00Z").value(), 1.0, nullptr}, b);
  CHECK(a == b);
  // 06:00 UTC is a quarter of a day: sin = 1, cos = 0.
  CHECK(a(1) == Approx(1.0));
  CHECK(a(2) == Approx(0.0).margin(1e-9));
}

TEST_CASE("seasonal phase: the same columns as fmod of the epoch seconds, before and after 1970", "[series]") {
  // Reference: the C library's fmod on the times as doubles (exact for
  // seconds below 2^53), which the design took before it used the integer
  // remainder; the columns must not move by a single bit.
  ModelSpec spec;
  spec.trend = false;
  spec.seasons = {Season{Seconds{31557600}, 2}, Season{Seconds{604800}, 1}};
  for (const char* text : {"1969-07-20T20:17:40Z", "1970-01-01T00:00:00Z", "2025-03-10T06:00:00Z",
                           "2031-12-31T23:59:59Z", "1901-02-03T04:05:06Z"}) {
    const TimePoint t = parse_time(text).value();
    Eigen::RowVectorXd row(7);
    design_row(spec, DesignInput{t, t, 1.0, nullptr}, row);
    const double epoch = static_cast<double>(t.time_since_epoch().count());
    int j = 1;
    for (const Season& s : spec.seasons) {
      const double period = static_cast<double>(s.period.count());
      const double phase = std::fmod(epoch, period) / period;
      for (int k = 1; k <= s.harmonics; ++k) {
        const double angle = 2.0 * std::numbers::pi * k * phase;
        CHECK(row(j++) == std::sin(angle));
        CHECK(row(j++) == std::cos(angle));
      }
    }
  }
}
