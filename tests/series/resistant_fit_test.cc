// Outbreak-resistant refits (Farrington et al. 1996 reweighting with the
// residual threshold 2.58 of Noufaily et al. 2013).
#include "series/series_model.h"

#include <cmath>

#include <catch2/catch.hpp>

#include "bounds/random.h"

using namespace tallyd;

namespace {

// 120 weekly records of Poisson(10), the last 6 of them an outbreak at 5x.
double fitted_mean(bool reweight) {
  static SeriesSettings settings;  // must outlive the model; rewritten per call
  settings.model.family = glm::Family::quasipoisson;
  settings.model.window = Window{std::nullopt, 200};
  settings.model.reweight = reweight;
  SeriesModel model("trap-r", settings);
  bounds::Rng rng(8);
  for (int week = 0; week < 120; ++week) {
    Observation o;
    o.series = "trap-r";
    o.time = TimePoint{Seconds{1600000000 + static_cast<std::int64_t>(week) * 7 * 86400}};
    o.count = rng.poisson(week >= 114 ? 50 : 10);
    model.learn(o);
  }
  return std::exp(model.fit().coefficients(0));
}

}  // namespace

TEST_CASE("reweighting keeps an outbreak out of its own baseline", "[series]") {
  // Plain quasi-Poisson mean of the window: about (114 * 10 + 6 * 50) / 120 = 12.
  const double plain = fitted_mean(false);
  const double resistant = fitted_mean(true);
  INFO("plain " << plain << ", resistant " << resistant);
  CHECK(plain == Approx(12).epsilon(0.08));
  // Down-weighted by residual^-2, the outbreak weeks pull the mean far less.
  CHECK(resistant < plain - 1.0);
  CHECK(resistant == Approx(10).epsilon(0.1));
}

TEST_CASE("guard band: the newest records stay out of the fit that judges the next", "[series]") {
  SeriesSettings guarded;
  guarded.model.family = glm::Family::poisson;
  guarded.model.reweight = false;
  guarded.model.min_history = 10;
  guarded.model.guard_records = 2;
  SeriesSettings plain = guarded;
  plain.model.guard_records = 0;
  SeriesModel a("g", guarded), b("g", plain);
  bounds::Rng rng(12);
  auto at = [](int day, std::int64_t count) {
    Observation o;
    o.series = "g";
    o.time = TimePoint{Seconds{1600000000 + static_cast<std::int64_t>(day) * 86400}};
    o.count = count;
    return o;
  };
  for (int d = 0; d < 11; ++d) {
    const Observation o = at(d, rng.poisson(6));
    a.learn(o);
    b.learn(o);
  }
  CHECK(b.ready());
  CHECK_FALSE(a.ready());  // needs min_history + 2 records
  a.learn(at(11, 90));
  a.learn(at(12, 95));
  REQUIRE(a.ready());
  // a's fit uses the first 11 records only, as b's does.
  CHECK(a.fit().coefficients(0) == Approx(b.fit().coefficients(0)).epsilon(1e-9));
}
