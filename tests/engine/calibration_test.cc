// Calibration of the predictive bounds on data simulated from a known model.
#include "engine/engine.h"

#include <cmath>

#include <catch2/catch.hpp>

#include "bounds/random.h"

using namespace tallyd;

TEST_CASE("central 95% predictive intervals cover 94-96% and the alpha=0.01 tail holds", "[engine][calibration]") {
  // Known model: log mu = log(30) + 0.6 sin + 0.3 cos (weekly cycle) + log(exposure),
  // exposure varying 5-fold (1 to 5). Means run from about 12 to 280, large
  // enough that the discreteness of the bounds moves coverage by well under 1%.
  SettingsTable settings;
  ModelSpec& m = settings.defaults.model;
  m.family = glm::Family::poisson;
  m.seasons = {Season{Seconds{7 * 86400}, 1}};
  m.window = Window{std::nullopt, 150};
  m.min_history = 30;
  settings.defaults.alert.alpha = 0.025;
  settings.defaults.alert.direction = Direction::both;
  Engine engine(settings);

  bounds::Rng rng(20250601);
  const TimePoint start = parse_time("2024-01-01T00:00:00Z").value();
  std::uint64_t judged = 0, covered = 0, high_at_1pct = 0;
  for (int s = 0; s < 80; ++s) {
    const std::string id = "calib-" + std::to_string(s);
    for (int d = 0; d < 300; ++d) {
      Observation o;
      o.series = id;
      o.time = start + Seconds{static_cast<std::int64_t>(d) * 86400 + 3600 * (s % 24)};
      o.exposure = 1.0 + 4.0 * rng.uniform();
      const double phase = 2 * M_PI * std::fmod(static_cast<double>(o.time.time_since_epoch().count()), 7 * 86400.0) /
                           (7 * 86400.0);
      const double mu = o.exposure * std::exp(std::log(30.0) + 0.6 * std::sin(phase) + 0.3 * std::cos(phase));
      o.count = rng.poisson(mu);
      IngestResult r = engine.ingest(o);
      if (r.kind != IngestResult::Kind::judged) continue;
      ++judged;
      const bounds::Bounds& b = r.prediction->bounds;
      if (o.count >= b.lower && o.count <= b.upper) ++covered;
      if (b.p_high <= 0.01) ++high_at_1pct;
    }
  }
  REQUIRE(judged >= 20000);
  const double coverage = static_cast<double>(covered) / judged;
  const double high_rate = static_cast<double>(high_at_1pct) / judged;
  INFO("judged " << judged << ", coverage " << coverage << ", high-side rate at 0.01 " << high_rate);
  CHECK(coverage >= 0.94);
  CHECK(coverage <= 0.96);
  // Binomial Monte Carlo error: 3 standard errors above nominal.
  CHECK(high_rate <= 0.01 + 3 * std::sqrt(0.01 * 0.99 / judged));
  CHECK(high_rate >= 0.01 - 3 * std::sqrt(0.01 * 0.99 / judged) - 0.002);  // discrete bounds may sit a little under
}
