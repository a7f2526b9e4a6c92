// The shift and low-run detectors on predictions with known in-control laws.
#include "detect/detectors.h"

#include <cmath>

#include <catch2/catch.hpp>

#include "bounds/random.h"

using namespace tallyd;
using namespace tallyd::detect;

namespace {

// A prediction with no parameter uncertainty: Y ~ Poisson(mean).
Prediction known_poisson(double mean, std::int64_t count) {
  Prediction p;
  p.predictor.eta_mean = std::log(mean);
  p.predictor.eta_variance = 0;
  p.noise.family = glm::Family::poisson;
  bounds::Options o;
  p.bounds = bounds::evaluate(p.predictor, p.noise, count, o, nullptr);
  return p;
}

Observation record(std::int64_t count, int week) {
  Observation o;
  o.series = "trap-7";
  o.count = count;
  o.time = TimePoint{Seconds{1700000000 + static_cast<std::int64_t>(week) * 7 * 86400}};
  return o;
}

}  // namespace

TEST_CASE("low-count run: in-control alert rate per record at or below its alpha", "[detect]") {
  // Under the model, P(the current run reaches joint probability <= alpha at a
  // given record) <= alpha, since that needs every record of the trailing
  // window to be low. Checked on Poisson counts with means 0.7 to 30 and a
  // loose alpha so the rate is measurable: 3 binomial standard errors.
  SeriesSettings s;
  s.detect.low_run = true;
  s.detect.low_run_alpha = 0.01;
  LimitTable limits;
  bounds::Rng rng(11);
  const double means[] = {0.7, 2, 5, 30};
  std::uint64_t records = 0, alerts = 0;
  for (double mean : means) {
    DetectorState state;
    for (int week = 0; week < 40000; ++week) {
      const std::int64_t y = rng.poisson(mean);
      alerts += run_detectors(state, record(y, week), known_poisson(mean, y), s, limits).size();
      ++records;
    }
  }
  const double rate = static_cast<double>(alerts) / records;
  INFO("low-run alerts " << alerts << " in " << records << " records: rate " << rate);
  CHECK(rate <= 0.01 + 3 * std::sqrt(0.01 * 0.99 / records));
  CHECK(alerts > 0);  // the detector does fire by chance at a loose alpha
}

TEST_CASE("low-count run: a dead trap with mean 3 per week is flagged after 3 zeros", "[detect]") {
  // P(Y = 0) = exp(-3) = 0.0498 (Poisson), at or below the 0.1 quantile, so
  // each zero multiplies the run probability by 0.0498: 0.0498^3 = 1.2e-4 <= 0.001.
  SeriesSettings s;
  s.detect.low_run = true;
  LimitTable limits;
  DetectorState state;
  std::vector<Alert> got;
  int week = 0;
  for (; week < 10 && got.empty(); ++week) got = run_detectors(state, record(0, week), known_poisson(3, 0), s, limits);
  REQUIRE(got.size() == 1);
  CHECK(week == 3);
  CHECK(got[0].detector == "low_run");
  CHECK(got[0].side == AlertSide::low);
  CHECK(got[0].statistic == 3);
  CHECK(got[0].p_value == Approx(std::pow(std::exp(-3.0), 3)).epsilon(1e-9));
  CHECK(state.run_records == 0);  // a new run starts after the alert
  // A count at the mean ends a run.
  run_detectors(state, record(0, 20), known_poisson(3, 0), s, limits);
  CHECK(state.run_records == 1);
  run_detectors(state, record(3, 21), known_poisson(3, 3), s, limits);
  CHECK(state.run_records == 0);
  CHECK(state.run_log_probability == 0);
}

TEST_CASE("shift CUSUM: in-control run length near its target, doubling caught, sides follow direction", "[detect]") {
  SeriesSettings s;
  s.detect.shift = true;
  s.detect.shift_arl_records = 100;
  LimitTable limits;
  bounds::Rng rng(3);
  // In control, mean 5: alerts per record about 1 / ARL0 per side (2 sides).
  DetectorState state;
  std::uint64_t high = 0, low = 0;
  const int n = 60000;
  for (int week = 0; week < n; ++week) {
    const std::int64_t y = rng.poisson(5);
    for (const Alert& a : run_detectors(state, record(y, week), known_poisson(5, y), s, limits))
      ++(a.side == AlertSide::high ? high : low);
  }
  INFO("high " << high << ", low " << low << " in " << n << " records");
  // Within 20% of n / ARL0 = 600 per side (Monte Carlo sd about 25).
  CHECK(high >= 480);
  CHECK(high <= 720);
  CHECK(low >= 480);
  CHECK(low <= 720);

  s.alert.direction = Direction::high;
  state = DetectorState{};
  int first = -1;
  for (int week = 0; week < 30 && first < 0; ++week) {
    const std::int64_t y = rng.poisson(10);  // doubled
    for (const Alert& a : run_detectors(state, record(y, week), known_poisson(5, y), s, limits)) {
      CHECK(a.side == AlertSide::high);
      CHECK(a.detector == "shift");
      CHECK(a.statistic > 0);
      CHECK(a.alpha == Approx(0.01));
      first = week;
    }
  }
  CHECK(first >= 0);
  CHECK(first < 10);
  CHECK(state.shift_low == 0);  // the low side is not watched
}
