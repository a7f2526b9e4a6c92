#include "engine/engine.h"

#include <cmath>
#include <string>
#include <vector>

#include <catch2/catch.hpp>

#include "bounds/random.h"

using namespace tallyd;

namespace {

// The benchmark's feed in small (src/bench/replay_bench.cc): daily negative
// binomial counts (size 5) around a series level with an annual and a
// weekly cycle and a slight trend, exposure 0.5-1.5.
std::vector<Observation> cadence_feed(int series, int days) {
  std::vector<Observation> feed;
  bounds::Rng rng(2024);
  std::vector<double> level(static_cast<std::size_t>(series));
  for (double& l : level) l = std::log(2.0 + 40.0 * rng.uniform());
  const TimePoint start = parse_time("2023-01-01T06:00:00Z").value();
  for (int d = 0; d < days; ++d) {
    for (int s = 0; s < series; ++s) {
      Observation o;
      o.series = "bench-" + std::to_string(s);
      o.time = start + Seconds{static_cast<std::int64_t>(d) * 86400};
      o.exposure = 0.5 + rng.uniform();
      const double yr = 2 * M_PI * d / 365.25, wk = 2 * M_PI * d / 7.0;
      o.count = rng.negbin(o.exposure * std::exp(level[static_cast<std::size_t>(s)] + 0.002 * d / 365.25 +
                                                 0.5 * std::sin(yr) + 0.2 * std::cos(wk)),
                           5.0);
      feed.push_back(std::move(o));
    }
  }
  return feed;
}

SettingsTable cadence_settings(std::size_t refit_every, bool doubt, std::size_t cadence_from = 0,
                               double doubt_factor = 10) {
  SettingsTable t;
  ModelSpec& m = t.defaults.model;
  m.family = glm::Family::quasipoisson;
  m.trend = true;
  m.seasons = {Season{Seconds{31557600}, 1}, Season{Seconds{7 * 86400}, 1}};
  m.window = Window{std::nullopt, std::size_t{365}};
  m.min_history = 30;
  m.refit_every = refit_every;
  m.refit_on_doubt = doubt;
  m.cadence_from = cadence_from;
  m.doubt_factor = doubt_factor;
  t.defaults.alert.alpha = 0.001;
  t.defaults.alert.screen = true;  // exact (tests/engine/engine_screen_test.cc); keeps this test quick
  return t;
}

// Per record: 0 no bound alert, 1 high, -1 low, 2 not judged.
std::vector<int> verdicts(const std::vector<Observation>& feed, const SettingsTable& settings) {
  Engine engine(settings);
  std::vector<int> out;
  out.reserve(feed.size());
  for (const Observation& o : feed) {
    const IngestResult r = engine.ingest(o);
    out.push_back(!r.prediction ? 2 : !r.alert ? 0 : r.alert->side == AlertSide::high ? 1 : -1);
  }
  return out;
}

// The rule for the 40 x 200 feed (at most 0.1% of verdicts differ
// from refitting after every record), and at most one alert in 20 gained or
// lost in all.
void check_within_rule(const std::vector<int>& every, const std::vector<int>& lazy) {
  std::size_t judged = 0, differ = 0, alerts = 0, lazy_alerts = 0;
  for (std::size_t i = 0; i < every.size(); ++i) {
    judged += every[i] != 2;
    alerts += every[i] == 1 || every[i] == -1;
    lazy_alerts += lazy[i] == 1 || lazy[i] == -1;
    differ += every[i] != lazy[i];
  }
  REQUIRE(judged > 6000);
  REQUIRE(alerts > 3);  // the feed has alerts to lose or gain
  CHECK(static_cast<double>(differ) <= 0.001 * static_cast<double>(judged));
  CHECK(std::abs(static_cast<double>(lazy_alerts) - static_cast<double>(alerts)) <= 0.05 * static_cast<double>(alerts) + 0.5);
}

}  // namespace

// The rule for a refit cadence: alerts may differ from refitting
// after every record on at most 0.1% of records. docs/benchmarks.md gives
// the figure per cadence on the benchmark feed (a plain cadence of 2 already
// breaks it there); this guards the setting the docs name as allowed,
// refit_every = 7 with refit_on_doubt, on a smaller feed of the same kind,
// and checks that it does refit less often.
TEST_CASE("refit cadence: every 7th record with refit on doubt changes at most 0.1% of verdicts",
          "[engine][cadence]") {
  const std::vector<Observation> feed = cadence_feed(40, 200);
  const std::vector<int> every = verdicts(feed, cadence_settings(1, false));
  const std::vector<int> lazy = verdicts(feed, cadence_settings(7, true));
  std::size_t judged = 0, differ = 0, alerts = 0;
  for (std::size_t i = 0; i < feed.size(); ++i) {
    judged += every[i] != 2;
    alerts += every[i] == 1 || every[i] == -1;
    differ += every[i] != lazy[i];
  }
  REQUIRE(judged > 6000);
  REQUIRE(alerts > 3);  // the feed has alerts to lose or gain
  CHECK(static_cast<double>(differ) <= 0.001 * static_cast<double>(judged));
}

TEST_CASE("refit cadence: refit on doubt refits far less often than every record", "[engine][cadence]") {
  const std::vector<Observation> feed = cadence_feed(10, 150);
  const SettingsTable every_settings = cadence_settings(1, false);
  const SettingsTable lazy_settings = cadence_settings(7, true);
  Engine every(every_settings), lazy(lazy_settings);
  for (const Observation& o : feed) {
    every.ingest(o);
    lazy.ingest(o);
  }
  std::uint64_t fits_every = 0, fits_lazy = 0;
  for (const auto& [id, model] : every.series()) fits_every += model->fits_done();
  for (const auto& [id, model] : lazy.series()) fits_lazy += model->fits_done();
  CHECK(fits_lazy * 3 < fits_every);
}

// The setting docs/benchmarks.md ("Speed, fifth pass") recommends for speed:
// refit every 28th record on doubt at 30 alpha, after every record while the
// window holds fewer than 60. Held to the same 0.1% rule, and to losing or
// gaining at most one alert in 20 on this feed.
TEST_CASE("refit cadence: every 28th record on doubt at 30 alpha from 60 records changes at most 0.1% of verdicts",
          "[engine][cadence]") {
  const std::vector<Observation> feed = cadence_feed(40, 200);
  const std::vector<int> every = verdicts(feed, cadence_settings(1, false));
  check_within_rule(every, verdicts(feed, cadence_settings(28, true, 60, 30)));
}

// model.step_between_refits (series/window_step.h) with refit on doubt at
// 10 alpha, a full refit every 91st record and after every record while the
// window holds fewer than 60: the setting docs/benchmarks.md ("Speed, sixth
// pass") recommends. Held to the 0.1% rule and the one-alert-in-20 bound, and
// it must fit fewer times than the fifth pass's setting (every 28th on doubt
// at 30 alpha), which is what it is for.
TEST_CASE("refit cadence: a Newton step per record with refit on doubt changes at most 0.1% of verdicts",
          "[engine][cadence][step]") {
  const std::vector<Observation> feed = cadence_feed(40, 200);
  const std::vector<int> every = verdicts(feed, cadence_settings(1, false));
  SettingsTable stepped = cadence_settings(91, true, 60, 10);
  stepped.defaults.model.step_between_refits = true;
  check_within_rule(every, verdicts(feed, stepped));

  const SettingsTable fifth = cadence_settings(28, true, 60, 30);
  Engine a(stepped), b(fifth);
  for (const Observation& o : feed) {
    a.ingest(o);
    b.ingest(o);
  }
  std::uint64_t fits_step = 0, fits_fifth = 0;
  for (const auto& [id, model] : a.series()) fits_step += model->fits_done();
  for (const auto& [id, model] : b.series()) fits_fifth += model->fits_done();
  INFO("fits: steps " << fits_step << ", every 28th on doubt " << fits_fifth);
  CHECK(fits_step < fits_fifth);
}
