#include "bounds/tail_floor.h"

#include <cmath>
#include <vector>

#include <boost/math/distributions/negative_binomial.hpp>
#include <boost/math/distributions/poisson.hpp>
#include <catch2/catch.hpp>

using namespace tallyd::bounds;
using tallyd::glm::Family;
using tallyd::glm::Link;

namespace {

struct Exact {
  double at_least;  // P(Y >= y)
  double at_most;   // P(Y <= y)
};

// Reference: Boost.Math's poisson_distribution and negative_binomial_distribution
// (r successes with probability p; the count of failures is NB2 with size r
// and mean r (1 - p) / p), independent of the code under test.
Exact exact(const NoiseAt& d, std::int64_t y) {
  const double k = static_cast<double>(y);
  if (d.poisson) {
    const boost::math::poisson_distribution<double> law(d.mu);
    return {y == 0 ? 1.0 : boost::math::cdf(boost::math::complement(law, k - 1)), boost::math::cdf(law, k)};
  }
  const boost::math::negative_binomial_distribution<double> law(d.size, d.p);
  return {y == 0 ? 1.0 : boost::math::cdf(boost::math::complement(law, k - 1)), boost::math::cdf(law, k)};
}

}  // namespace

TEST_CASE("tail floors lie below the exact Poisson, NB2 and quasi-Poisson tails", "[bounds][tail_floor]") {
  std::vector<CountNoise> noises;
  noises.push_back(CountNoise{Family::poisson, Link::log, 1, 0});
  noises.push_back(CountNoise{Family::quasipoisson, Link::log, 2.5, 0});  // NB2 with size mu / 1.5
  noises.push_back(CountNoise{Family::negbin, Link::log, 1, 4.0});
  noises.push_back(CountNoise{Family::negbin, Link::log, 1, 0.5});  // size below 1: ratios increase in k
  int checked = 0, useful = 0, near = 0;
  for (const CountNoise& noise : noises) {
    for (double mean : {0.3, 4.0, 30.0, 400.0, 20000.0}) {
      const NoiseAt d = noise_at(noise, mean);
      const double sd = std::sqrt(d.poisson ? d.mu : d.mu + d.mu * d.mu / d.size);
      for (double z : {-4.0, -2.5, -1.5, -1.0, -0.5, -0.2, 0.0, 0.2, 0.5, 1.0, 1.5, 2.5, 4.0, 8.0}) {
        const auto y = static_cast<std::int64_t>(std::max(0.0, std::round(mean + z * sd)));
        for (double wanted : {0.0, 0.05, 1.0}) {
          const TailFloor f = tail_floor(d, y, wanted);
          const Exact e = exact(d, y);
          ++checked;
          CHECK(f.at_least >= 0);
          CHECK(f.at_most >= 0);
          CHECK(f.at_least <= e.at_least);
          CHECK(f.at_most <= e.at_most);
          if (wanted == 1.0 && std::abs(z) <= 0.5) {
            // Near the mean the floors must be worth having: at least a
            // third of the exact tail on both sides.
            ++near;
            if (f.at_least >= e.at_least / 3 && f.at_most >= e.at_most / 3) ++useful;
          }
        }
      }
    }
  }
  CHECK(checked == 4 * 5 * 14 * 3);
  CHECK(useful >= near * 9 / 10);
}

TEST_CASE("tail floors at y = 0 and for a mean at zero", "[bounds][tail_floor]") {
  const NoiseAt poisson = noise_at(CountNoise{}, 2.0);
  const TailFloor f = tail_floor(poisson, 0, 1.0);
  CHECK(f.at_least == 1.0);
  // P(Y = 0) = exp(-2) exactly is the whole lower tail; the floor is below
  // it by its charged rounding only.
  CHECK(f.at_most <= std::exp(-2.0));
  CHECK(f.at_most == Approx(std::exp(-2.0)).epsilon(1e-12));
  const NoiseAt zero = noise_at(CountNoise{}, 0.0);
  CHECK(tail_floor(zero, 0, 1.0).at_least == 1.0);
  CHECK(tail_floor(zero, 0, 1.0).at_most == 1.0);
  CHECK(tail_floor(zero, 3, 1.0).at_least == 0.0);
  CHECK(tail_floor(poisson, -1, 1.0).at_most == 0.0);
}

TEST_CASE("tail floors stop early only once both sides exceed what is wanted", "[bounds][tail_floor]") {
  const NoiseAt d = noise_at(CountNoise{Family::quasipoisson, Link::log, 2.0, 0}, 150.0);
  for (std::int64_t y : {120, 150, 170}) {
    const TailFloor quick = tail_floor(d, y, 0.01);
    const TailFloor full = tail_floor(d, y, 1.0);
    CHECK(quick.at_least > 0.01);
    CHECK(quick.at_most > 0.01);
    CHECK(full.at_least >= quick.at_least);
    CHECK(full.at_most >= quick.at_most);
  }
}
