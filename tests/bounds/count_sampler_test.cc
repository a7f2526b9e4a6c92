#include "bounds/count_sampler.h"

#include <cmath>
#include <cstdint>
#include <limits>
#include <vector>

#include <boost/math/distributions/gamma.hpp>
#include <boost/math/distributions/negative_binomial.hpp>
#include <boost/math/distributions/normal.hpp>
#include <boost/math/distributions/poisson.hpp>
#include <catch2/catch.hpp>

#include "bounds/count_noise.h"
#include "support/fit_checks.h"

// Each sampler against Boost.Math's distribution at a fixed seed: sample
// mean and variance within 5 standard errors, and a Pearson chi-square
// (counts; cells pooled to expect >= 5, common practice) or Kolmogorov-
// Smirnov test (continuous) that fails below a p-value of 1e-6
// (tests/support/fit_checks.h). A correct sampler fails one of them with
// probability below ~1e-5 for another seed; the sizes below make a wrong
// constant or a wrong branch miss by many standard errors.
namespace tallyd::bounds {
namespace {

using glm::Family;
using glm::Link;
using testing::check_cells;
using testing::check_goodness_of_fit;
using testing::check_kolmogorov_smirnov;
using testing::check_moments;
using testing::sample_moments;

template <class Draw>
std::vector<std::int64_t> counts(int n, Draw draw) {
  std::vector<std::int64_t> out(static_cast<std::size_t>(n));
  for (std::int64_t& y : out) y = draw();
  return out;
}

template <class Dist>
void check_counts(const std::vector<std::int64_t>& draws, const Dist& reference) {
  std::size_t i = 0;
  const int n = static_cast<int>(draws.size());
  check_moments(sample_moments(n, [&] { return static_cast<double>(draws[i++]); }), reference, n);
  check_goodness_of_fit(draws, reference);
}

TEST_CASE("ziggurat normal draws follow N(0, 1), tails included", "[bounds]") {
  // Marsaglia and Tsang (2000): 128 layers, the base layer's tail beyond
  // r = 3.4426 drawn by Marsaglia's (1964) method. One million draws put
  // ~576 beyond +-r and ~63 beyond +-4, so the tail cells below check the
  // tail branch and the wedges, which a KS test over the whole line would
  // barely see.
  constexpr int n = 1000000;
  Rng rng(21);
  std::vector<double> draws(n);
  for (double& x : draws) x = ziggurat_normal(rng);
  const boost::math::normal_distribution<> reference(0, 1);
  std::size_t i = 0;
  check_moments(sample_moments(n, [&] { return draws[i++]; }), reference, n);
  check_kolmogorov_smirnov(draws, reference);
  std::vector<double> cuts = {-4.0, -3.4426, -3.0, -2.5};
  for (double c = -2.0; c <= 2.001; c += 0.1) cuts.push_back(std::fabs(c) < 1e-9 ? 0.0 : c);
  for (const double c : {2.5, 3.0, 3.4426, 4.0}) cuts.push_back(c);
  check_cells(draws, reference, cuts);
}

TEST_CASE("gamma_variate draws follow Gamma(shape, 1)", "[bounds]") {
  // Marsaglia and Tsang (2000), with the U^(1/shape) boost below 1 (their section 6).
  constexpr int n = 100000;
  Rng rng(22);
  for (const double shape : {0.05, 0.3, 1.0, 2.5, 40.0}) {
    INFO("shape " << shape);
    std::vector<double> draws(n);
    for (double& x : draws) x = gamma_variate(rng, shape);
    const boost::math::gamma_distribution<> reference(shape, 1.0);
    std::size_t i = 0;
    check_moments(sample_moments(n, [&] { return draws[i++]; }), reference, n);
    check_kolmogorov_smirnov(draws, reference);
  }
  CHECK(gamma_variate(rng, 0) == 0);
  CHECK(gamma_variate(rng, -1) == 0);
  CHECK(gamma_variate(rng, std::nan("")) == 0);
}

TEST_CASE("poisson_variate draws follow Poisson(mean)", "[bounds]") {
  // Inversion below kPoissonInversionBelow, PTRS (Hormann 1993) from it on:
  // the means on either side of the switch get a million draws, as PTRS's
  // constants are least forgiving at its smallest mean (a +0.5 slip in its
  // 0.43 offset moves the mean by ~7 standard errors of a million draws).
  Rng rng(23);
  for (const double mean : {0.3, 4.0, kPoissonInversionBelow - 0.01, kPoissonInversionBelow, 30.0, 1000.0}) {
    INFO("mean " << mean);
    const int n = mean < 5 ? 200000 : 1000000;
    check_counts(counts(n, [&] { return poisson_variate(rng, mean); }), boost::math::poisson_distribution<>(mean));
  }
  CHECK(poisson_variate(rng, 0) == 0);
  CHECK(poisson_variate(rng, -2) == 0);
  CHECK(poisson_variate(rng, std::nan("")) == 0);
  const double huge = static_cast<double>(poisson_variate(rng, 1e300));
  CHECK(std::fabs(huge - Rng::kMaxPoissonMean) < 10 * std::sqrt(Rng::kMaxPoissonMean));
}

TEST_CASE("CountSampler draws the noise noise_at describes", "[bounds]") {
  constexpr int n = 200000;
  Rng rng(24);
  const double below = kPoissonInversionBelow - 0.5, above = kPoissonInversionBelow + 0.5;

  SECTION("Poisson, and the families' Poisson limits") {
    for (const CountNoise noise : {CountNoise{Family::poisson, Link::log, 1, 0},
                                   CountNoise{Family::quasipoisson, Link::log, 0.8, 0},
                                   CountNoise{Family::negbin, Link::log, 1, std::numeric_limits<double>::infinity()}}) {
      const CountSampler sampler(noise);
      for (const double mu : {2.5, above}) {
        INFO("family " << static_cast<int>(noise.family) << " mu " << mu);
        check_counts(counts(n, [&] { return sampler.draw(mu, rng); }), boost::math::poisson_distribution<>(mu));
      }
    }
  }

  SECTION("quasi-Poisson: NB2 with size mu / (phi - 1), success probability 1 / phi") {
    // Boost's negative_binomial(r, p) counts failures before the r-th
    // success: NB2 with size r and p = r / (r + mu) = 1 / phi here.
    for (const double phi : {1.3, 2.5, 40.0}) {
      const CountSampler sampler(CountNoise{Family::quasipoisson, Link::log, phi, 0});
      for (const double mu : {0.4, 5.0, below, above, 60.0, 400.0}) {
        INFO("phi " << phi << " mu " << mu);
        const NoiseAt d = noise_at(CountNoise{Family::quasipoisson, Link::log, phi, 0}, mu);
        REQUIRE_FALSE(d.poisson);
        check_counts(counts(n, [&] { return sampler.draw(mu, rng); }),
                     boost::math::negative_binomial_distribution<>(d.size, d.p));
      }
    }
  }

  SECTION("negbin: NB2 with size theta") {
    for (const double theta : {0.5, 3.0, 25.0}) {
      const CountSampler sampler(CountNoise{Family::negbin, Link::log, 1, theta});
      for (const double mu : {0.8, below, above, 90.0}) {
        INFO("theta " << theta << " mu " << mu);
        check_counts(counts(n, [&] { return sampler.draw(mu, rng); }),
                     boost::math::negative_binomial_distribution<>(theta, theta / (theta + mu)));
      }
    }
  }

  SECTION("means at zero, NaN and beyond kMaxMean") {
    for (const CountNoise noise : {CountNoise{Family::poisson, Link::log, 1, 0},
                                   CountNoise{Family::quasipoisson, Link::log, 2, 0},
                                   CountNoise{Family::negbin, Link::log, 1, 4}}) {
      const CountSampler sampler(noise);
      CHECK(sampler.draw(0, rng) == 0);
      CHECK(sampler.draw(kMinMean, rng) == 0);
      CHECK(sampler.draw(-3, rng) == 0);
      CHECK(sampler.draw(std::nan(""), rng) == 0);
      // Clamped to kMaxMean = 1e9: a draw within a few sd of it (sd at most
      // ~5e8 for negbin theta 4 at 1e9; the Poisson ones ~3e4).
      const double big = static_cast<double>(sampler.draw(1e15, rng));
      CHECK(big > 0);
      CHECK(big < 1e10);
    }
    const CountSampler poisson(CountNoise{Family::poisson, Link::log, 1, 0});
    CHECK(std::fabs(static_cast<double>(poisson.draw(1e15, rng)) - kMaxMean) < 10 * std::sqrt(kMaxMean));
  }
}

TEST_CASE("CountSampler draws are reproducible from the seed", "[bounds]") {
  const CountSampler sampler(CountNoise{Family::quasipoisson, Link::log, 2.2, 0});
  Rng a(31), b(31);
  for (int i = 0; i < 2000; ++i) {
    const double mu = 0.5 + 0.05 * i;
    REQUIRE(sampler.draw(mu, a) == sampler.draw(mu, b));
    REQUIRE(ziggurat_normal(a) == ziggurat_normal(b));
  }
}

}  // namespace
}  // namespace tallyd::bounds
