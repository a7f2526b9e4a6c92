// The sustained-shift CUSUM: log-likelihood ratio increments for a rate
// change by a factor, and its decision limit from a target in-control
// average run length (ARL0).
//
// For a count y with in-control mean mu, the increment is
//   log f(y; factor * mu) - log f(y; mu),
// f Poisson (Lucas 1985: the same CUSUM as his integer form scaled by
// log(factor)) or NB2 with a fixed size r (the overdispersed analogue):
//   Poisson: y log(factor) - mu (factor - 1)
//   NB2:     y log(factor (r + mu) / (r + factor mu)) + r log((r + mu) / (r + factor mu)).
// The statistic is S = max(0, S + increment); an alarm when S > h.
//
// h comes from the Markov-chain approximation of Brook and Evans (1972): the
// interval [0, h] is cut into `states` cells, the in-control transition
// probabilities between cells come from the exact count distribution, and
// the ARL from state 0 is the solution of (I - R) L = 1. h is then found by
// bisection on log ARL. This assumes a constant in-control mean; see
// docs/detection.md for how a varying mean is handled.
// Pure functions and one value cache; never throw on data.
#pragma once

#include <cstdint>
#include <map>
#include <tuple>

namespace tallyd::detect {

// The in-control count noise at one mean: Poisson when size is not a finite
// positive number, else NB2 with Var = mean + mean^2 / size.
struct CountLaw {
  double mean = 1;
  double size = 0;
  bool poisson() const;
};

// Log-likelihood ratio of count y for mean factor * law.mean against law.mean,
// size held fixed. factor > 0.
double shift_increment(std::int64_t y, const CountLaw& law, double factor);

// In-control ARL (in records) of the one-sided CUSUM with limit h > 0, by the
// Brook-Evans chain with `states` cells (>= 10). Returns +inf when the chain
// cannot reach the limit (e.g. the increment is never positive).
double chain_arl(const CountLaw& law, double factor, double h, int states = 150);

// The limit h whose chain ARL is nearest arl0 (> 1) on the log scale: the ARL
// of counts is a step function of h, and of the two limits either side of the
// step that crosses arl0 the nearer is kept (bisection to 1e-4 relative in h).
double decision_limit(const CountLaw& law, double factor, double arl0, int states = 150);

// Decision limits cached by value. The mean and the dispersion index
// (1 + mean / size) are rounded to a grid of 5% steps on the log scale and the
// limit is computed for the rounded law, so equal inputs always give equal
// limits, whatever came before (no hidden dependence on history; the cache
// is a speed-up only and needs no checkpoint). Not thread-safe.
class LimitTable {
 public:
  double limit(const CountLaw& law, double factor, double arl0);
  // The rounded law a limit is computed for.
  static CountLaw rounded(const CountLaw& law);
  std::size_t size() const { return cache_.size(); }

 private:
  std::map<std::tuple<long, long, double, double>, double> cache_;
};

}  // namespace tallyd::detect
