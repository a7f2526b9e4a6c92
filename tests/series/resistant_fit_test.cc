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
