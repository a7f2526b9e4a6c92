// Internal to bounds: evaluate() by simulation.
//
// Draws `draws` pairs (eta*, y*): eta* = eta_mean + sqrt(eta_variance) z,
// mu = g^{-1}(eta*), y* from the count noise at mu. Quantiles and tail
// probabilities are those of the empirical distribution of y*; expected is
// the mean of the drawn mu (Rao-Blackwellised: less noisy than the mean of
// y*). With eta_variance == 0 no normal is drawn and expected = mu exactly.
// Cost: O(draws) draws plus two linear-time selections; no sort.
#pragma once

#include <cstdint>

#include "bounds/predictive.h"
#include "bounds/random.h"

namespace tallyd::bounds {

// Preconditions (checked by evaluate): eta_mean and eta_variance finite,
// eta_variance >= 0, alpha in [1e-300, 0.5], 0 <= observed <= 2^53.
Bounds simulate_bounds(const Predictor& predictor, const CountNoise& noise, std::int64_t observed,
                       int draws, double alpha, Rng& rng);

}  // namespace tallyd::bounds
