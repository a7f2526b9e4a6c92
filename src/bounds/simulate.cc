#include "bounds/simulate.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <vector>

#include "bounds/count_noise.h"
#include "bounds/count_sampler.h"

namespace tallyd::bounds {
namespace {

// The order statistic y_(index) (0-based) of `y`, leaving `y` partitioned
// around it; `done` is an index already placed by an earlier selection,
// which splits the search range.
std::int64_t select(std::vector<std::int64_t>& y, std::size_t index, std::size_t done) {
  auto first = y.begin();
  auto last = y.end();
  if (done < y.size()) {
    if (index == done) return y[index];
    if (index > done) first = y.begin() + static_cast<std::ptrdiff_t>(done) + 1;
    else last = y.begin() + static_cast<std::ptrdiff_t>(done);
  }
  std::nth_element(first, y.begin() + static_cast<std::ptrdiff_t>(index), last);
  return y[index];
}

// All tail probabilities are count / n with this one expression, so
// "count <= tail" and "count / n <= alpha" are the same test (division by a
// fixed n is monotone): that is what makes the bounds and p-values agree exactly.
double fraction(std::size_t count, std::size_t n) { return static_cast<double>(count) / static_cast<double>(n); }

std::size_t draw_total(int draws) { return static_cast<std::size_t>(std::max(draws, 1)); }

}  // namespace

std::size_t simulate_tail(int draws, double alpha) {
  const std::size_t n = draw_total(draws);
  std::size_t tail = static_cast<std::size_t>(std::floor(alpha * static_cast<double>(n)));
  while (tail + 1 < n && fraction(tail + 1, n) <= alpha) ++tail;
  while (tail > 0 && fraction(tail, n) > alpha) --tail;
  return tail;  // alpha <= 0.5 keeps tail <= n / 2 < n
}

bool draws_fall_below(int draws, double alpha, double wanted) {
  return fraction(simulate_tail(draws, alpha) + 1, draw_total(draws)) <= wanted;
}

Bounds simulate_bounds(const Predictor& predictor, const CountNoise& noise, std::int64_t observed,
                       int draws, double alpha, Rng& rng, bool early_settle) {
  const std::size_t n = draw_total(draws);
  const double n_real = static_cast<double>(n);
  const double sd = std::sqrt(predictor.eta_variance);
  const std::size_t tail = simulate_tail(draws, alpha);

  // Filled as drawn; not zeroed first (a record that stops early never
  // reads it, and one that runs to the end has written every entry).
  std::vector<std::int64_t> y;
  y.reserve(n);
  std::size_t at_most = 0;   // #(y <= observed) among the draws so far
  std::size_t at_least = 0;  // #(y >= observed)
  double sum_mu = 0;
  const CountSampler sampler(noise);
  // mean_from_eta clamps to kMaxMean; the noise puts a mean at or below
  // kMinMean at zero, which counts 0 towards the mean of mu as well.
  const double fixed_mu = mean_from_eta(noise.link, predictor.eta_mean);
  for (std::size_t i = 0; i < n; ++i) {
    std::int64_t v = 0;
    if (sd == 0) {
      v = sampler.draw(fixed_mu, rng);
    } else {
      const double mu = mean_from_eta(noise.link, predictor.eta_mean + sd * ziggurat_normal(rng));
      v = sampler.draw(mu, rng);
      sum_mu += mu > kMinMean ? mu : 0;
    }
    y.push_back(v);
    at_most += v <= observed;
    at_least += v >= observed;
    if (early_settle && at_most > tail && at_least > tail) {
      // Both counts only grow: the remaining draws cannot flag the record.
      Bounds settled;
      settled.screened = true;
      settled.lower = 0;
      settled.upper = std::numeric_limits<std::int64_t>::max();
      settled.p_low = fraction(at_most, n);
      settled.p_high = fraction(at_least, n);
      return settled;
    }
  }

  Bounds b;
  b.expected = sd == 0 ? (fixed_mu > kMinMean ? fixed_mu : 0) : sum_mu / n_real;
  b.p_low = fraction(at_most, n);
  b.p_high = fraction(at_least, n);

  // lower = y_(tail): #(y <= l) >= tail + 1 exactly when l >= y_(tail).
  // upper = y_(n - 1 - tail): #(y > u) <= tail exactly when u >= that order statistic.
  const std::size_t lower_index = tail;
  const std::size_t upper_index = n - 1 - tail;
  b.lower = select(y, lower_index, n);
  b.upper = select(y, upper_index, lower_index);
  return b;
}

}  // namespace tallyd::bounds
