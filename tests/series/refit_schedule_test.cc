#include "series/series_model.h"

#include <catch2/catch.hpp>

#include "bounds/random.h"

using namespace tallyd;

namespace {

// Daily Poisson counts around 12 per unit exposure, exposure 0.5-1.5 (invented).
std::vector<Observation> daily_counts(int days) {
  std::vector<Observation> out;
  bounds::Rng rng(7);
  const TimePoint start = parse_time("2024-03-01T06:00:00Z").value();
  for (int d = 0; d < days; ++d) {
    Observation o;
    o.series = "s";
    o.time = start + Seconds{static_cast<std::int64_t>(d) * 86400};
    o.exposure = 0.5 + rng.uniform();
    o.count = rng.poisson(12.0 * o.exposure);
    out.push_back(o);
  }
  return out;
}

// Refits made while learning `days` records, and the window sizes (records
// learned) after which the model refitted.
std::vector<std::size_t> refit_points(std::size_t refit_every, std::size_t cadence_from, int days,
                                      std::uint64_t* fits) {
  SeriesSettings settings;
  settings.model.family = glm::Family::poisson;
  settings.model.trend = true;
  settings.model.window = Window{std::nullopt, std::size_t{365}};
  settings.model.min_history = 30;
  settings.model.refit_every = refit_every;
  settings.model.cadence_from = cadence_from;
  settings.model.reweight = false;  // one fit per refit, so fits_done counts refits
  SeriesModel model("s", settings);
  std::vector<std::size_t> points;
  std::size_t n = 0;
  for (const Observation& o : daily_counts(days)) {
    model.learn(o);
    ++n;
    if (model.has_fit() && model.records_since_refit() == 0) points.push_back(n);
  }
  *fits = model.fits_done();
  return points;
}

}  // namespace

TEST_CASE("refit schedule: every record until the window holds cadence_from records, then every refit_every",
          "[series][cadence]") {
  std::uint64_t fits = 0;
  // Without cadence_from: the first fit at min_history (30), then every 7th.
  const std::vector<std::size_t> plain = refit_points(7, 0, 150, &fits);
  REQUIRE(plain.size() == 18);  // 30, 37, ..., 149
  CHECK(plain.front() == 30);
  CHECK(plain[1] == 37);
  CHECK(plain.back() == 149);
  CHECK(fits == 18);

  // cadence_from = 60: after every record from 30 to 59 (30 refits), then
  // the cadence counts on from the refit at 59: 66, 73, ..., 150 (13).
  const std::vector<std::size_t> young = refit_points(7, 60, 150, &fits);
  REQUIRE(young.size() == 43);
  for (std::size_t i = 0; i < 30; ++i) CHECK(young[i] == 30 + i);
  CHECK(young[30] == 66);
  CHECK(young.back() == 150);
  CHECK(fits == 43);

  // With refit_every = 1 it changes nothing.
  const std::vector<std::size_t> every = refit_points(1, 60, 80, &fits);
  CHECK(every.size() == 51);  // 30..80
  CHECK(fits == 51);
}
