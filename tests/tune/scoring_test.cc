#include "tune/scoring.h"

#include <catch2/catch.hpp>

#include <cmath>

#include "alert/alert.h"

using namespace tallyd;
using namespace tallyd::tune;

namespace {
TimePoint day(int d) { return parse_time("2025-01-01T00:00:00Z").value() + Seconds{86400LL * d}; }
}  // namespace

TEST_CASE("quantile7 is the type-7 sample quantile", "[tune]") {
  // Hyndman & Fan (1996), definition 7 (R's quantile() default):
  // h = (n-1)p, x[floor h] + (h - floor h)(x[floor h + 1] - x[floor h]).
  // For {1,2,3,4,10}: p = 0.9 gives h = 3.6, 4 + 0.6 * 6 = 7.6; p = 0.5 gives 3.
  std::vector<double> v{10, 3, 1, 4, 2};
  CHECK(quantile7(v, 0.9) == Approx(7.6));
  CHECK(quantile7(v, 0.5) == 3);
  std::vector<double> one{5};
  CHECK(quantile7(one, 0.9) == 5);
  std::vector<double> none;
  CHECK(std::isnan(quantile7(none, 0.5)));
}

TEST_CASE("flagged_side applies judge_count's rule", "[tune]") {
  // Same bounds and alphas through alert/alert.h's judge_count and through flagged_side.
  const double ps[] = {1e-6, 5e-4, 1e-3, 2e-3, 0.2, 1};
  for (double ph : ps)
    for (double pl : ps)
      for (Direction dir : {Direction::high, Direction::low, Direction::both})
        for (double alpha : {1e-4, 1e-3, 1e-2}) {
          bounds::Bounds b{5, 1, 9, ph, pl};
          AlertSpec spec;
          spec.alpha = alpha;
          spec.direction = dir;
          Observation o;
          o.series = "s";
          const auto a = judge_count(o, b, spec);
          const int expected = !a ? 0 : (a->side == AlertSide::high ? 1 : -1);
          CHECK(flagged_side(JudgedRecord{0, day(0), ph, pl, dir}, alpha) == expected);
        }
}

TEST_CASE("score_alpha counts alerts, false alerts, episodes and delays", "[tune]") {
  JudgedLog log;
  log.series_ids = {"a", "b"};
  // Series a: days 0..100, alerts (p_high 1e-4) on days 10 (outside), 52 and 55 (inside episode 50-60).
  for (int d = 0; d <= 100; ++d) {
    const double p = (d == 10 || d == 52 || d == 55) ? 1e-4 : 0.3;
    log.records.push_back({0, day(d), p, 0.7, Direction::both});
  }
  // Series b: days 0..50, one low alert (p_low 1e-5) on day 20, watched on the high side only.
  for (int d = 0; d <= 50; ++d) log.records.push_back({1, day(d), 0.5, d == 20 ? 1e-5 : 0.5, Direction::high});
  std::vector<Episode> eps{{"a", day(50), day(60)},   // hit on day 52: delay 2 days
                           {"a", day(80), day(85)},   // missed
                           {"b", day(30), day(31)},   // missed
                           {"c", day(1), day(2)}};    // no such series: listed, not judged
  const Score s = score_alpha(log, eps, 1e-3);
  CHECK(s.judged == 152);
  CHECK(s.alerts == 3);
  CHECK(s.false_alerts == 1);
  CHECK(s.series_years == Approx(150.0 / 365.25));
  CHECK(s.false_per_series_year == Approx(365.25 / 150.0));
  CHECK(s.episodes_listed == 4);
  CHECK(s.episodes_judged == 3);
  CHECK(s.episodes_hit == 1);
  CHECK(s.detection == Approx(1.0 / 3));
  CHECK(s.delay_median_days == Approx(2));
  CHECK(s.episode_records == 11 + 6 + 2);
  CHECK(s.episode_records_alerted == 2);
  // Watching both sides on b would add its low alert; a tighter alpha drops all.
  CHECK(score_alpha(log, eps, 1e-5).alerts == 0);
  CHECK(std::isnan(score_alpha(log, {}, 1e-3).detection));
}
