#include "bounds/screen.h"

#include <cmath>
#include <vector>

#include <boost/math/distributions/binomial.hpp>
#include <boost/math/distributions/poisson.hpp>
#include <catch2/catch.hpp>

#include "bounds/gauss_hermite.h"
#include "bounds/quadrature.h"
#include "bounds/simulate.h"

using namespace tallyd::bounds;
using tallyd::glm::Family;
using tallyd::glm::Link;

TEST_CASE("screen: with no parameter uncertainty the floors are the exact Poisson tails", "[bounds][screen]") {
  // Reference: Boost.Math's poisson_distribution (independent of the noise
  // code under test). One component of weight 1, so the floors are the tails
  // (stage 1's; wanted = 1 keeps stage 0, whose floors are lower, out).
  const Predictor p{std::log(12.0), 0};
  const CountNoise noise;  // Poisson, log link
  const boost::math::poisson_distribution<double> poisson(12.0);
  for (std::int64_t y : {0, 3, 12, 20, 30}) {
    const ScreenOutcome s = screen_record(p, noise, y, 48, 0.001, 0, 1.0);
    const double cdf = boost::math::cdf(poisson, static_cast<double>(y));
    const double at_least = y == 0 ? 1.0 : boost::math::cdf(boost::math::complement(poisson, static_cast<double>(y - 1)));
    CHECK(s.p_low_floor == Approx(cdf).epsilon(1e-10));
    CHECK(s.p_high_floor == Approx(at_least).epsilon(1e-10));
    CHECK(s.expected == Approx(12.0).epsilon(1e-12));
  }
}

TEST_CASE("screen: under the log link each side's floor weighs the rule's nodes on that side of eta_mean",
          "[bounds][screen]") {
  // Reference: Boost.Math's poisson_distribution for the tails at the
  // central mean, and the Gauss-Hermite rule's own weights summed here node
  // by node (screen.cc takes these sums once per rule instead of per record).
  const CountNoise noise;  // Poisson, log link
  const HermiteRule& rule = gauss_hermite(48);
  double up = 0, low = 0;
  for (std::size_t i = 0; i < rule.nodes.size(); ++i) {
    if (rule.nodes[i] >= 0) up += rule.normalised[i];
    if (rule.nodes[i] <= 0) low += rule.normalised[i];
  }
  int checked = 0;
  for (double variance : {0.002, 0.01, 0.05}) {
    const Predictor p{std::log(20.0), variance};
    REQUIRE_FALSE(choose_rule(p, noise, 48, 0.001).grid);
    const boost::math::poisson_distribution<double> poisson(20.0);
    for (std::int64_t y : {8, 14, 20, 27, 33}) {
      const ScreenOutcome s = screen_record(p, noise, y, 48, 0.001, 0, 1.0);  // wanted 1: no stage 0
      if (s.stage != 1) continue;
      ++checked;
      const double cdf = boost::math::cdf(poisson, static_cast<double>(y));
      const double at_least = boost::math::cdf(boost::math::complement(poisson, static_cast<double>(y - 1)));
      CHECK(s.p_high_floor == Approx(up * at_least).epsilon(1e-12));
      CHECK(s.p_low_floor == Approx(low * cdf).epsilon(1e-12));
    }
  }
  CHECK(checked >= 10);
}

namespace {

struct ScreenTally {
  int settled = 0, flagged = 0, checked = 0;
};

// One record through the screen and through the full quadrature of the same
// mixture: the floors must lie below the full p-values, and the screen must
// never settle a record those flag.
void check_screen_below_full(const Predictor& p, const CountNoise& noise, std::int64_t y, double alpha,
                             int grid_limit, ScreenTally& tally) {
  const ScreenOutcome s = screen_record(p, noise, y, 48, alpha, 0, 0, grid_limit);
  const Bounds full = quadrature_bounds(p, noise, y, 48, alpha, grid_limit);
  ++tally.checked;
  CHECK(s.expected == full.expected);  // the same mixture, summed the same way
  CHECK(s.p_high_floor <= full.p_high * (1 + 1e-9));
  CHECK(s.p_low_floor <= full.p_low * (1 + 1e-9));
  const bool alert = full.p_high <= alpha || full.p_low <= alpha;
  if (alert) ++tally.flagged;
  if (s.settled) {
    ++tally.settled;
    CHECK_FALSE(alert);
  }
}

}  // namespace

TEST_CASE("screen: settles only records the full quadrature judges unremarkable, and floors lie below its p-values",
          "[bounds][screen]") {
  // The full quadrature p-values are themselves checked against Boost.Math's
  // adaptive Gauss-Kronrod in quadrature_test.cc; here the screen must bound
  // them from below and never settle a record they flag.
  const double alpha = 0.001;
  std::vector<CountNoise> noises;
  noises.push_back(CountNoise{Family::poisson, Link::log, 1, 0});
  noises.push_back(CountNoise{Family::quasipoisson, Link::log, 2.5, 0});
  noises.push_back(CountNoise{Family::negbin, Link::log, 1, 4.0});
  noises.push_back(CountNoise{Family::poisson, Link::sqrt, 1, 0});
  ScreenTally tally;
  for (const CountNoise& noise : noises) {
    for (double mean : {0.5, 4.0, 30.0, 400.0}) {
      for (double variance : {0.0, 0.01, 0.2}) {
        const double eta = noise.link == Link::sqrt ? std::sqrt(mean) : std::log(mean);
        const Predictor p{eta, noise.link == Link::sqrt ? variance * mean : variance};
        for (double factor : {0.0, 0.2, 0.5, 0.8, 1.0, 1.3, 2.0, 3.0, 5.0}) {
          const auto y = static_cast<std::int64_t>(std::floor(factor * mean));
          check_screen_below_full(p, noise, y, alpha, kDefaultGridNodeLimit, tally);
        }
      }
    }
  }
  // The grid covers both kinds of record, so the checks above bite.
  CHECK(tally.settled > tally.checked / 3);
  CHECK(tally.flagged > 20);
}

TEST_CASE("screen: under the bracketing grid, floors lie below the bracketed p-values", "[bounds][screen]") {
  // The bracketed p-values are checked against Boost.Math's adaptive
  // Gauss-Kronrod in quadrature_test.cc; the screen must stay below them.
  const double alpha = 0.001;
  const int limit = 256;
  ScreenTally tally;
  for (const CountNoise& noise : {CountNoise{Family::poisson, Link::log, 1, 0},
                                  CountNoise{Family::quasipoisson, Link::log, 2.5, 0}}) {
    for (double mean : {60.0, 2000.0}) {
      const Predictor p{std::log(mean), 0.5};
      REQUIRE(choose_rule(p, noise, 48, alpha, limit).bracket);
      for (double factor : {0.0, 0.01, 0.05, 0.2, 0.5, 1.0, 2.0, 5.0, 20.0, 60.0, 200.0}) {
        const auto y = static_cast<std::int64_t>(std::floor(factor * mean));
        check_screen_below_full(p, noise, y, alpha, limit, tally);
      }
    }
  }
  CHECK(tally.settled > tally.checked / 4);
  CHECK(tally.flagged >= 4);
}

TEST_CASE("screen: the Chernoff bound lies above the exact binomial lower tail", "[bounds][screen]") {
  // Reference: Boost.Math binomial_distribution; the bound is Hoeffding
  // (1963), Theorem 1, for the lower tail of a binomial fraction.
  for (int draws : {500, 10000}) {
    for (double alpha : {0.001, 0.01}) {
      for (double p : {0.002, 0.005, 0.02, 0.1}) {
        if (p <= alpha) continue;
        const boost::math::binomial_distribution<double> bin(draws, p);
        const double exact = boost::math::cdf(bin, std::floor(alpha * draws));
        CHECK(binomial_low_tail_bound(alpha, p, draws) >= exact);
      }
    }
  }
  CHECK(binomial_low_tail_bound(0.01, 0.005, 1000) == 1);  // p below alpha: nothing settled
  CHECK(binomial_low_tail_bound(0.001, 0.02, 10000) < 1e-12);
}

TEST_CASE("screen: stage 2 settles records in the tails of a wide mixture, never one the full quadrature flags",
          "[bounds][screen]") {
  // Counts between 2 and 4 sd of a Poisson-log mixture with sd(eta*) of 0.1
  // to 0.45 (Gauss-Hermite and grid rules): stage 1's floor is about half the
  // central tail there. The reference is the full quadrature, itself checked
  // against Boost.Math's adaptive Gauss-Kronrod in quadrature_test.cc.
  const double alpha = 0.001;
  int second = 0, checked = 0;
  for (const CountNoise& noise : {CountNoise{Family::poisson, Link::log, 1, 0},
                                  CountNoise{Family::quasipoisson, Link::log, 1.8, 0}}) {
    for (double mean : {20.0, 80.0, 300.0}) {
      for (double sd : {0.1, 0.2, 0.45}) {
        const Predictor p{std::log(mean), sd * sd};
        const double spread = std::sqrt(mean * noise.dispersion + sd * sd * mean * mean);
        for (double z = -4; z <= 4.01; z += 0.25) {
          const auto y = static_cast<std::int64_t>(std::max(0.0, std::round(mean + z * spread)));
          const ScreenOutcome s = screen_record(p, noise, y, 48, alpha, 0);
          const Bounds full = quadrature_bounds(p, noise, y, 48, alpha);
          ++checked;
          CHECK(s.p_high_floor <= full.p_high * (1 + 1e-9));
          CHECK(s.p_low_floor <= full.p_low * (1 + 1e-9));
          if (s.settled) CHECK_FALSE((full.p_high <= alpha || full.p_low <= alpha));
          if (s.settled && s.stage == 2) ++second;
        }
      }
    }
  }
  CHECK(checked == 594);
  CHECK(second > 20);  // stage 2 did settle records stage 1 could not
}

TEST_CASE("screen: simulate's stage 2 settles only records far from the draws' verdict", "[bounds][screen]") {
  // The band floors bound the true mixture (Gaussian eta*), which the full
  // quadrature gives to ~1e-8 (quadrature_test.cc). A record settled for
  // 10,000 draws must have both p-values well above alpha (the Chernoff
  // condition needs about 3.5 alpha; 2 alpha is checked) and its draws
  // (src/bounds/simulate.h, fixed seed) must not flag it.
  const double alpha = 0.001;
  const int draws = 10000;
  int second = 0, checked = 0;
  for (const CountNoise& noise : {CountNoise{Family::poisson, Link::log, 1, 0},
                                  CountNoise{Family::quasipoisson, Link::log, 1.8, 0}}) {
    for (double mean : {20.0, 300.0}) {
      for (double sd : {0.2, 0.45}) {
        const Predictor p{std::log(mean), sd * sd};
        const double spread = std::sqrt(mean * noise.dispersion + sd * sd * mean * mean);
        for (double z = -4; z <= 4.01; z += 0.5) {
          const auto y = static_cast<std::int64_t>(std::max(0.0, std::round(mean + z * spread)));
          const ScreenOutcome s = screen_record(p, noise, y, 48, alpha, draws);
          ++checked;
          if (!s.settled) continue;
          // The engine judges a settled record by these floors: above alpha.
          CHECK(s.p_high_floor > alpha);
          CHECK(s.p_low_floor > alpha);
          const Bounds full = quadrature_bounds(p, noise, y, 48, alpha);
          CHECK(full.p_high > 2 * alpha);
          CHECK(full.p_low > 2 * alpha);
          Rng rng(static_cast<std::uint64_t>(1000 + checked));
          const Bounds drawn = simulate_bounds(p, noise, y, draws, alpha, rng);
          CHECK(drawn.p_high > alpha);
          CHECK(drawn.p_low > alpha);
          if (s.stage == 2) ++second;
        }
      }
    }
  }
  CHECK(checked == 136);
  CHECK(second > 5);  // stage 2 settled records stage 1 could not
}

TEST_CASE("screen stage 0: settles only what the full quadrature leaves unflagged, below its p-values, and keeps "
          "the doubt test's answer",
          "[bounds][screen]") {
  // Stage 0 has no special function; its floors must still lie below the
  // full quadrature's p-values (themselves checked against Boost.Math's
  // adaptive Gauss-Kronrod in quadrature_test.cc). `wanted` plays the
  // engine's refit-on-doubt level: a record's "both floors above it" must
  // come out as with exact tails (wanted = 1 turns stage 0 off).
  const double alpha = 0.001;
  const double doubt = 30 * alpha;
  std::vector<CountNoise> noises;
  noises.push_back(CountNoise{Family::poisson, Link::log, 1, 0});
  noises.push_back(CountNoise{Family::quasipoisson, Link::log, 2.5, 0});
  noises.push_back(CountNoise{Family::negbin, Link::log, 1, 4.0});
  noises.push_back(CountNoise{Family::negbin, Link::log, 1, 0.7});
  int stage0 = 0, checked = 0;
  for (const CountNoise& noise : noises) {
    for (double mean : {0.4, 3.0, 30.0, 400.0, 5000.0}) {
      for (double variance : {0.0, 0.01, 0.2}) {
        const Predictor p{std::log(mean), variance};
        for (double factor : {0.0, 0.3, 0.6, 0.8, 0.9, 1.0, 1.1, 1.2, 1.5, 2.0, 4.0}) {
          const auto y = static_cast<std::int64_t>(std::floor(factor * mean));
          const Bounds full = quadrature_bounds(p, noise, y, 48, alpha);
          const bool alert = full.p_high <= alpha || full.p_low <= alpha;
          const ScreenOutcome exact_only = screen_record(p, noise, y, 48, alpha, 0, 1.0);
          CHECK(exact_only.stage != 0);
          for (double wanted : {0.0, doubt}) {
            const ScreenOutcome s = screen_record(p, noise, y, 48, alpha, 0, wanted);
            ++checked;
            CHECK(s.expected == full.expected);
            CHECK(s.p_high_floor <= full.p_high * (1 + 1e-9));
            CHECK(s.p_low_floor <= full.p_low * (1 + 1e-9));
            if (s.settled) CHECK_FALSE(alert);
            if (s.stage == 0) {
              ++stage0;
              CHECK(s.settled);
              CHECK(s.p_high_floor > wanted);
              CHECK(s.p_low_floor > wanted);
            }
            if (wanted == doubt) {
              const bool clear = s.p_high_floor > doubt && s.p_low_floor > doubt;
              const bool clear_exact = exact_only.p_high_floor > doubt && exact_only.p_low_floor > doubt;
              CHECK(clear == clear_exact);
              CHECK(s.settled == exact_only.settled);
            }
          }
        }
      }
    }
  }
  // Stage 0 carries a good share of the records, so the checks above bite.
  CHECK(stage0 > checked / 4);
}

TEST_CASE("screen stage 0 with simulate: settled records' floors clear the Chernoff test", "[bounds][screen]") {
  const double alpha = 0.001;
  const int draws = 10000;
  const CountNoise noise{Family::quasipoisson, Link::log, 2.0, 0};
  int stage0 = 0;
  for (double mean : {2.0, 40.0, 900.0}) {
    const Predictor p{std::log(mean), 0.02};
    for (double factor : {0.0, 0.7, 1.0, 1.3, 3.0}) {
      const auto y = static_cast<std::int64_t>(std::floor(factor * mean));
      const ScreenOutcome s = screen_record(p, noise, y, 48, alpha, draws);
      const ScreenOutcome exact_only = screen_record(p, noise, y, 48, alpha, draws, 1.0);
      if (s.stage == 0) {
        ++stage0;
        CHECK(binomial_low_tail_bound(alpha, s.p_high_floor, draws) <= kSimulateScreenRisk);
        CHECK(binomial_low_tail_bound(alpha, s.p_low_floor, draws) <= kSimulateScreenRisk);
        CHECK(exact_only.settled);  // stage 0's floors are below the exact stages'
        CHECK(s.p_high_floor <= exact_only.p_high_floor);
        CHECK(s.p_low_floor <= exact_only.p_low_floor);
      }
    }
  }
  CHECK(stage0 >= 4);
}
