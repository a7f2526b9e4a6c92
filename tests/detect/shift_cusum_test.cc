// The shift CUSUM's increments and its Brook-Evans decision limit, checked
// against direct simulation of the CUSUM.
#include "detect/shift_cusum.h"

#include <cmath>
#include <vector>

#include <catch2/catch.hpp>

#include "bounds/random.h"

using namespace tallyd;
using namespace tallyd::detect;

namespace {

// Run lengths (records to the first alarm, from S = 0) of the one-sided CUSUM
// on counts drawn from `truth`, with increments computed for `law`.
double mean_run_length(const CountLaw& law, double true_mean, double factor, double h, int runs, std::uint64_t seed,
                       int cap = 1000000) {
  bounds::Rng rng(seed);
  double total = 0;
  for (int r = 0; r < runs; ++r) {
    double s = 0;
    int n = 0;
    while (n < cap) {
      ++n;
      const std::int64_t y = law.poisson() ? rng.poisson(true_mean) : rng.negbin(true_mean, law.size);
      s = std::max(0.0, s + shift_increment(y, law, factor));
      if (s > h) break;
    }
    total += n;
  }
  return total / runs;
}

}  // namespace

TEST_CASE("Poisson increment is Lucas's CUSUM scaled by log(factor)", "[detect]") {
  // Lucas (1985): reference value K = (mu_a - mu_0) / (ln mu_a - ln mu_0); the
  // log-likelihood ratio is ln(mu_a / mu_0) * (y - K).
  const CountLaw law{5, 0};
  const double k = (10.0 - 5.0) / (std::log(10.0) - std::log(5.0));
  for (std::int64_t y : {0, 3, 7, 20})
    CHECK(shift_increment(y, law, 2.0) == Approx(std::log(2.0) * (static_cast<double>(y) - k)).epsilon(1e-12));
  // NB2 with a huge size tends to the Poisson increment (the NB2 law's Poisson limit).
  const CountLaw nb{5, 1e9};
  CHECK(shift_increment(7, nb, 2.0) == Approx(shift_increment(7, law, 2.0)).epsilon(1e-6));
}

TEST_CASE("Brook-Evans ARL matches simulated in-control run length", "[detect]") {
  // The chain approximation of Brook and Evans (1972) against a direct
  // simulation of the same CUSUM; 4000 runs give a standard error of about
  // 1.6% of the ARL (run lengths are roughly geometric).
  struct Case {
    CountLaw law;
    double factor;
  };
  for (const Case& c : {Case{{5, 0}, 2.0}, Case{{5, 0}, 0.5}, Case{{20, 4}, 2.0}, Case{{1.5, 0}, 2.0}}) {
    const double h = 3.0;
    const double chain = chain_arl(c.law, c.factor, h, 200);
    const double sim = mean_run_length(c.law, c.law.mean, c.factor, h, 4000, 77);
    INFO("mean " << c.law.mean << " size " << c.law.size << " factor " << c.factor << ": chain " << chain
                 << ", simulated " << sim);
    CHECK(chain == Approx(sim).epsilon(0.08));
  }
}

TEST_CASE("decision limit from ARL0: measured in-control run length within 20% of target", "[detect]") {
  LimitTable table;
  for (double factor : {2.0, 0.5}) {
    const CountLaw law{5, 0};
    const double arl0 = 200;
    const double h = table.limit(law, factor, arl0);
    const double sim = mean_run_length(law, 5, factor, h, 3000, 2024);
    INFO("factor " << factor << ": h " << h << ", simulated ARL " << sim);
    CHECK(sim >= 0.8 * arl0);
    CHECK(sim <= 1.2 * arl0);
  }
  // Overdispersed: NB2 with Var = 3 mu (size 5 at mean 10).
  const CountLaw nb{10, 5};
  const double h = table.limit(nb, 2.0, 300);
  const double sim = mean_run_length(nb, 10, 2.0, h, 2000, 99);
  INFO("NB2: h " << h << ", simulated ARL " << sim);
  CHECK(sim >= 0.8 * 300);
  CHECK(sim <= 1.2 * 300);
  // Cached by value: the same law gives the same limit, computed once.
  const std::size_t cached = table.size();
  CHECK(table.limit(nb, 2.0, 300) == h);
  CHECK(table.size() == cached);
}

TEST_CASE("a sustained doubling of a mean-5 series is flagged within a few weeks", "[detect]") {
  // Issue requirement: 2x rate, mean 5 per week, target ARL0 = 500 weeks.
  LimitTable table;
  const CountLaw law{5, 0};
  const double h = table.limit(law, 2.0, 500);
  const double ood = mean_run_length(law, 10, 2.0, h, 2000, 31);
  bounds::Rng rng(5);
  int within_4 = 0;
  const int runs = 1000;
  for (int r = 0; r < runs; ++r) {
    double s = 0;
    for (int week = 1; week <= 4; ++week) {
      s = std::max(0.0, s + shift_increment(rng.poisson(10), law, 2.0));
      if (s > h) {
        ++within_4;
        break;
      }
    }
  }
  INFO("h " << h << ", mean delay " << ood << " weeks, flagged within 4 weeks in " << within_4 << " of " << runs);
  CHECK(ood < 4);
  CHECK(within_4 > runs / 2);
}
