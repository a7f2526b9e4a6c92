// Internal to bounds: evaluate() by simulation.
//
// Draws `draws` pairs (eta*, y*): eta* = eta_mean + sqrt(eta_variance) z,
// mu = g^{-1}(eta*), y* from the count noise at mu (z by the ziggurat
// normal, y* by CountSampler: count_sampler.h). Quantiles and tail
// probabilities are those of the empirical distribution of y*; expected is
// the mean of the drawn mu (Rao-Blackwellised: less noisy than the mean of
// y*). With eta_variance == 0 no normal is drawn and expected = mu exactly.
// Cost: O(draws) draws plus two linear-time selections; no sort.
#pragma once

#include <cstddef>
#include <cstdint>

#include "bounds/predictive.h"
#include "bounds/random.h"

namespace tallyd::bounds {

// The largest count of draws whose fraction of `draws` (at least 1 used)
// is <= alpha: simulate_bounds flags a side whose count is at most this.
std::size_t simulate_tail(int draws, double alpha);

// Whether every result simulate_bounds(..., early_settle = true) can return
// has a p-value at or below `wanted`: a run to the end flags a side (a
// p-value <= alpha), and an early stop comes the moment the second count
// passes `tail`, so one of its p-values is exactly (tail + 1) / draws.
// True when that fraction is <= wanted. alpha in [1e-300, 0.5], as below.
bool draws_fall_below(int draws, double alpha, double wanted);

// Preconditions (checked by evaluate): eta_mean and eta_variance finite,
// eta_variance >= 0, alpha in [1e-300, 0.5], 0 <= observed <= 2^53.
//
// With `early_settle` (used by Options::screen): stops drawing as soon as
// both #(y* >= observed) and #(y* <= observed) exceed the largest count whose
// fraction of `draws` is <= alpha. Both counts only grow with more draws, so
// the full draws could not flag the record on either side: the verdict is
// exactly that of the full draws (no alert), drawn from the same stream in
// the same order. Such a result is marked screened: lower 0, upper
// INT64_MAX, p_high and p_low the counts so far over `draws` (lower bounds
// on the full draws' p-values), expected left 0 for the caller to set.
Bounds simulate_bounds(const Predictor& predictor, const CountNoise& noise, std::int64_t observed,
                       int draws, double alpha, Rng& rng, bool early_settle = false);

}  // namespace tallyd::bounds
