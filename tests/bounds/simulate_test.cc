// simulate_bounds' early stop (Options::screen with simulate): the draws stop
// once neither side can alert. The check is against the same function with
// all draws from an identically seeded generator: exactness of the verdict is
// the property, so the full draws are the reference.
#include "bounds/simulate.h"

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <limits>

#include <catch2/catch.hpp>

using namespace tallyd::bounds;
using tallyd::glm::Family;
using tallyd::glm::Link;

TEST_CASE("simulate: the early stop gives the full draws' verdict and floors below their p-values", "[bounds][screen]") {
  const double alpha = 0.001;
  const int draws = 10000;
  int stopped = 0, full_runs = 0, flagged = 0, checked = 0;
  for (const CountNoise& noise : {CountNoise{Family::poisson, Link::log, 1, 0},
                                  CountNoise{Family::quasipoisson, Link::log, 2.5, 0},
                                  CountNoise{Family::negbin, Link::log, 1, 4}}) {
    for (double mean : {0.8, 6.0, 40.0}) {
      for (double sd : {0.0, 0.3}) {
        const Predictor p{std::log(mean), sd * sd};
        const double spread = std::sqrt(mean * 3 + sd * sd * mean * mean);
        for (double z = -3; z <= 6.01; z += 0.75) {
          const auto y = static_cast<std::int64_t>(std::max(0.0, std::round(mean + z * spread)));
          const std::uint64_t seed = 77 + static_cast<std::uint64_t>(checked++);
          Rng a(seed), b(seed);
          const Bounds full = simulate_bounds(p, noise, y, draws, alpha, a);
          const Bounds early = simulate_bounds(p, noise, y, draws, alpha, b, true);
          const bool full_alerts = full.p_high <= alpha || full.p_low <= alpha;
          flagged += full_alerts ? 1 : 0;
          if (early.screened) {
            ++stopped;
            CHECK_FALSE(full_alerts);
            CHECK(early.p_high > alpha);
            CHECK(early.p_low > alpha);
            CHECK(early.p_high <= full.p_high);
            CHECK(early.p_low <= full.p_low);
            CHECK(early.lower == 0);
            CHECK(early.upper == std::numeric_limits<std::int64_t>::max());
          } else {
            // Ran to the end: the very same bounds, bit for bit.
            ++full_runs;
            CHECK(early.lower == full.lower);
            CHECK(early.upper == full.upper);
            CHECK(early.p_high == full.p_high);
            CHECK(early.p_low == full.p_low);
            CHECK(early.expected == full.expected);
          }
        }
      }
    }
  }
  INFO("stopped " << stopped << ", ran to the end " << full_runs << ", flagged " << flagged);
  CHECK(stopped > 50);   // the stop does happen
  CHECK(full_runs > 10);  // and records near or past a bound run to the end
  CHECK(flagged > 5);     // among them, records the draws flag
}

TEST_CASE("simulate: every early-stopped or full result has a p-value at (tail + 1) / draws or below", "[bounds][screen]") {
  // draws_fall_below's claim, on results of the draws themselves: a record
  // that stops early does so the moment its second count passes `tail`, one
  // that runs to the end is flagged.
  const double alpha = 0.001;
  const int draws = 10000;
  const std::size_t tail = simulate_tail(draws, alpha);
  CHECK(tail == 10);  // 10 / 10000 <= 0.001 < 11 / 10000
  const double reach = static_cast<double>(tail + 1) / draws;
  CHECK(draws_fall_below(draws, alpha, reach));
  CHECK_FALSE(draws_fall_below(draws, alpha, std::nextafter(reach, 0.0)));
  CHECK(draws_fall_below(draws, alpha, 30 * alpha));
  CHECK_FALSE(draws_fall_below(draws, alpha, alpha));
  CHECK(simulate_tail(1, 0.5) == 0);
  CHECK(draws_fall_below(1, 0.5, 1.0));  // one draw: a stop has both counts at 1 of 1

  int results = 0;
  std::uint64_t seed = 500;
  const CountNoise noise{Family::quasipoisson, Link::log, 2.0, 0};
  for (double mean : {3.0, 25.0}) {
    const Predictor p{std::log(mean), 0.05};
    for (std::int64_t y = 0; y <= static_cast<std::int64_t>(4 * mean + 20); y += 1 + static_cast<std::int64_t>(mean / 8)) {
      Rng rng(++seed);
      const Bounds b = simulate_bounds(p, noise, y, draws, alpha, rng, true);
      INFO("mean " << mean << " observed " << y);
      CHECK(std::min(b.p_high, b.p_low) <= reach);
      ++results;
    }
  }
  CHECK(results > 20);
}
