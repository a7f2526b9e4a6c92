// Goodness-of-fit checks of random draws against Boost.Math distributions,
// shared by the sampler tests (tests/bounds/random_test.cc,
// tests/bounds/count_sampler_test.cc). Catch2 CHECKs inside.
#pragma once

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <vector>

#include <boost/math/distributions/chi_squared.hpp>
#include <catch2/catch.hpp>

namespace tallyd::testing {

// Monte Carlo checks use a fixed seed, so they are deterministic; the bounds
// are z = 5 standard errors, so a correct sampler would fail one with
// probability below 1e-6 for another seed, while a wrong algorithm (a bad
// constant, a missing boost for shape < 1) misses by many standard errors.
constexpr double kZ = 5;

struct Moments {
  double mean;
  double variance;
};

template <class Draw>
Moments sample_moments(int n, Draw draw) {
  // Welford's update: no cancellation for large means such as Poisson(1000).
  double mean = 0, m2 = 0;
  for (int i = 1; i <= n; ++i) {
    const double x = draw();
    const double delta = x - mean;
    mean += delta / i;
    m2 += delta * (x - mean);
  }
  return {mean, m2 / (n - 1)};
}

// Sample mean and variance against a Boost.Math distribution: the mean
// within kZ * sd / sqrt(n), the variance within kZ * sqrt((mu4 - sd^4) / n)
// with mu4 = kurtosis * sd^4 (large-sample standard error of s^2; common practice).
template <class Dist>
void check_moments(const Moments& got, const Dist& d, int n) {
  const double mean = boost::math::mean(d);
  const double var = boost::math::variance(d);
  const double mu4 = boost::math::kurtosis(d) * var * var;
  CHECK(std::fabs(got.mean - mean) <= kZ * std::sqrt(var / n));
  CHECK(std::fabs(got.variance - var) <= kZ * std::sqrt((mu4 - var * var) / n));
}

// Pearson chi-square of integer draws against a Boost.Math pmf, pooling the
// tails (and any cell) until every expected count is at least 5 (common
// practice); passes when the statistic is below the 1 - 1e-6 chi-square
// quantile (Boost.Math chi_squared), so only a real misfit fails.
template <class Dist>
void check_goodness_of_fit(const std::vector<std::int64_t>& draws, const Dist& d) {
  const double n = static_cast<double>(draws.size());
  const auto k_max = static_cast<std::int64_t>(boost::math::quantile(boost::math::complement(d, 1e-12)));
  std::vector<double> observed(static_cast<std::size_t>(k_max) + 2, 0.0);  // last slot: above k_max
  for (const std::int64_t y : draws) observed[static_cast<std::size_t>(std::min(y, k_max + 1))] += 1;
  std::vector<double> expected_cells, observed_cells;
  double cell_expected = 0, cell_observed = 0;
  for (std::int64_t k = 0; k <= k_max; ++k) {
    cell_expected += n * boost::math::pdf(d, static_cast<double>(k));
    cell_observed += observed[static_cast<std::size_t>(k)];
    if (cell_expected >= 5) {
      expected_cells.push_back(cell_expected);
      observed_cells.push_back(cell_observed);
      cell_expected = cell_observed = 0;
    }
  }
  // Everything above the last closed cell goes into a final upper-tail cell.
  const double tail_expected = n * boost::math::cdf(boost::math::complement(d, static_cast<double>(k_max))) + cell_expected;
  const double tail_observed = observed.back() + cell_observed;
  if (tail_expected >= 5 || expected_cells.empty()) {
    expected_cells.push_back(tail_expected);
    observed_cells.push_back(tail_observed);
  } else {
    expected_cells.back() += tail_expected;
    observed_cells.back() += tail_observed;
  }
  REQUIRE(expected_cells.size() >= 2);
  double statistic = 0;
  for (std::size_t i = 0; i < expected_cells.size(); ++i) {
    const double diff = observed_cells[i] - expected_cells[i];
    statistic += diff * diff / expected_cells[i];
  }
  const boost::math::chi_squared_distribution<> reference(static_cast<double>(expected_cells.size() - 1));
  INFO("cells " << expected_cells.size() << ", chi-square " << statistic);
  CHECK(statistic < boost::math::quantile(boost::math::complement(reference, 1e-6)));
}

// Kolmogorov-Smirnov test of continuous draws against a Boost.Math cdf,
// with the p-value from Kolmogorov's (1933) limiting distribution
// P(sqrt(n) D > t) = 2 sum_{j>=1} (-1)^(j-1) exp(-2 j^2 t^2); fails below 1e-6.
template <class Dist>
void check_kolmogorov_smirnov(std::vector<double> draws, const Dist& d) {
  std::sort(draws.begin(), draws.end());
  const double n = static_cast<double>(draws.size());
  double distance = 0;
  for (std::size_t i = 0; i < draws.size(); ++i) {
    const double f = boost::math::cdf(d, draws[i]);
    distance = std::max({distance, f - static_cast<double>(i) / n, static_cast<double>(i + 1) / n - f});
  }
  const double t = std::sqrt(n) * distance;
  // Below t = 0.3 the p-value exceeds 0.999 and the series converges slowly.
  double p_value = t < 0.3 ? 1 : 0;
  for (int j = 1; t >= 0.3 && j <= 100; ++j) p_value += (j % 2 ? 2 : -2) * std::exp(-2.0 * j * j * t * t);
  INFO("KS distance " << distance << ", p-value " << p_value);
  CHECK(std::min(p_value, 1.0) > 1e-6);
}

// Pearson chi-square of continuous draws in the cells cut at `cuts`
// (ascending; the outer cells open), against a Boost.Math cdf; each cell
// must expect at least 5 draws (common practice). Passes below the 1 - 1e-6
// chi-square quantile. Unlike a Kolmogorov-Smirnov test, a cell far out in
// a tail checks the tail's mass on its own.
template <class Dist>
void check_cells(const std::vector<double>& draws, const Dist& d, const std::vector<double>& cuts) {
  const double n = static_cast<double>(draws.size());
  std::vector<double> observed(cuts.size() + 1, 0.0);
  for (const double x : draws) {
    observed[static_cast<std::size_t>(std::upper_bound(cuts.begin(), cuts.end(), x) - cuts.begin())] += 1;
  }
  double statistic = 0;
  for (std::size_t i = 0; i <= cuts.size(); ++i) {
    // Mass of (cuts[i - 1], cuts[i]]; upper tails from the complement, so
    // a cell far out keeps its relative accuracy.
    const double below = i < cuts.size() ? boost::math::cdf(d, cuts[i]) : 1.0;
    const double above_low = i > 0 ? boost::math::cdf(boost::math::complement(d, cuts[i - 1])) : 1.0;
    const double above_high = i < cuts.size() ? boost::math::cdf(boost::math::complement(d, cuts[i])) : 0.0;
    const double mass = below < 0.5 ? below - (i > 0 ? boost::math::cdf(d, cuts[i - 1]) : 0.0) : above_low - above_high;
    const double expected = n * mass;
    INFO("cell " << i << " expected " << expected << " observed " << observed[i]);
    REQUIRE(expected >= 5);
    statistic += (observed[i] - expected) * (observed[i] - expected) / expected;
  }
  const boost::math::chi_squared_distribution<> reference(static_cast<double>(cuts.size()));
  INFO("cells " << cuts.size() + 1 << ", chi-square " << statistic);
  CHECK(statistic < boost::math::quantile(boost::math::complement(reference, 1e-6)));
}

}  // namespace tallyd::testing
