#include "bounds/predictive.h"

#include <algorithm>
#include <cmath>
#include <limits>

#include <boost/math/special_functions/erf.hpp>

#include "bounds/count_noise.h"
#include "bounds/quadrature.h"
#include "bounds/screen.h"
#include "bounds/simulate.h"

namespace tallyd::bounds {

std::string_view to_string(Method m) {
  switch (m) {
    case Method::simulate: return "simulate";
    case Method::quadrature: return "quadrature";
  }
  return "quadrature";
}

std::optional<Method> parse_method(std::string_view text) {
  if (text == "simulate") return Method::simulate;
  if (text == "quadrature") return Method::quadrature;
  return std::nullopt;
}

AlphaQuantile upper_quantile(double alpha) {
  AlphaQuantile q;
  q.alpha = std::clamp(alpha, 1e-300, 0.5);
  q.z = std::sqrt(2.0) * boost::math::erfc_inv(2 * q.alpha);
  return q;
}

namespace {

// A record answered from the screen's floors, without bounds: the interval
// is everything and the p-values are the floors.
Bounds from_floors(const ScreenOutcome& s) {
  Bounds b;
  b.expected = s.expected;
  b.lower = 0;
  b.upper = std::numeric_limits<std::int64_t>::max();
  b.p_high = s.p_high_floor;
  b.p_low = s.p_low_floor;
  return b;
}

}  // namespace

Bounds evaluate(const Predictor& predictor, const CountNoise& noise, std::int64_t observed,
                const Options& options, Rng* rng) {
  if (!std::isfinite(predictor.eta_mean) || !std::isfinite(predictor.eta_variance) || std::isnan(options.alpha)) {
    // Nothing can be said about this record; bounds that flag nothing.
    Bounds none;
    none.expected = std::numeric_limits<double>::quiet_NaN();
    none.lower = 0;
    none.upper = std::numeric_limits<std::int64_t>::max();
    none.p_high = 1;
    none.p_low = 1;
    return none;
  }
  Predictor p = predictor;
  p.eta_variance = std::max(p.eta_variance, 0.0);  // x'Cx can come out a hair below 0
  const double alpha = std::clamp(options.alpha, 1e-300, 0.5);
  const double z_alpha = options.quantile.alpha == alpha ? options.quantile.z : upper_quantile(alpha).z;
  // Counts beyond 2^53 are judged as 2^53, where the distribution is censored.
  observed = std::min(observed, kMaxCount);

  const bool simulate = options.method == Method::simulate && rng != nullptr;
  double screened_expected = 0;
  if (options.screen) {
    const ScreenOutcome s = screen_record(p, noise, observed, options.quadrature_nodes, alpha,
                                          simulate ? std::max(options.draws, 1) : 0, options.wanted_floor,
                                          options.grid_node_limit, z_alpha);
    screened_expected = s.expected;
    if (s.settled) {
      Bounds b = from_floors(s);
      b.screened = true;
      return b;
    }
    if (simulate && options.wanted_floor > 0 && draws_fall_below(options.draws, alpha, options.wanted_floor)) {
      // Whatever the draws gave, a p-value would be at or below wanted_floor
      // and the caller would discard them, refit and ask again (with a
      // stream seeded per record, so the draws it then gets do not depend
      // on whether any were made here).
      Bounds b = from_floors(s);
      b.deferred = true;
      return b;
    }
  }
  if (simulate) {
    // With the screen on, the draws stop once neither side can alert
    // (simulate.h): the verdict is the full draws' exactly.
    Bounds b = simulate_bounds(p, noise, observed, options.draws, alpha, *rng, options.screen);
    if (b.screened) b.expected = screened_expected;
    return b;
  }
  return quadrature_bounds(p, noise, observed, options.quadrature_nodes, alpha, options.grid_node_limit, z_alpha);
}

}  // namespace tallyd::bounds
