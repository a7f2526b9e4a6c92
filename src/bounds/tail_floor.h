// Internal to bounds: lower bounds on the two tails of one count noise
// (count_noise.h) without the Boost.Math incomplete gamma or beta.
//
// For the screen's first stage (screen.h): most records lie near their
// mean, where both p-values are far above alpha, and a floor well short of
// the exact tail already settles them. Two floors per side, the larger kept:
//   - a run of pmf terms: P(Y >= y) >= sum_{j=0..J} P(Y = y + j) (below:
//     y - j, j <= y). The ratio of neighbouring terms, pmf(k + 1) / pmf(k) =
//     mu / (k + 1) (Poisson) or (k + r) q / (k + 1) (NB2), is monotone in k
//     for every r, so over a run its smallest value rho is at one end, and
//     the run is at least pmf(y) * (1 + rho + ... + rho^J): one log-pmf
//     (log_gamma) and one geometric sum, whatever J;
//   - Cantelli's one-sided inequality (Cantelli 1928; any law with finite
//     variance): P(Y <= y) >= 1 - s^2 / (s^2 + (y + 1 - mu)^2) when
//     y + 1 > mu, and P(Y >= y) >= 1 - s^2 / (s^2 + (mu - y + 1)^2) when
//     y - 1 < mu, s^2 = mu (Poisson) or mu + mu^2 / r (NB2). It settles the
//     far side of a record away from the mean, which the pmf run does not.
// Every rounding is charged against the floor: the log-pmf loses a
// generous multiple of the rounding of its terms (and, for NB2, of the
// rounding that separates q from 1 - p, which the exact tails and the
// recurrences of the full search each use); the geometric sum a relative
// 1e-10. So the floors are below the exact tails of the law noise_at
// describes, not merely close to them. Where that charge grows large (counts
// or sizes beyond ~1e12) the floor is 0 and the caller falls back to exact
// tails. Pure; never throws; no allocation.
#pragma once

#include <cstdint>

#include "bounds/count_noise.h"

namespace tallyd::bounds {

struct TailFloor {
  double at_least = 0;  // <= P(Y >= y)
  double at_most = 0;   // <= P(Y <= y)
};

// Floors for y >= 0 (y < 0 gives 0 and 0). Cantelli first; then runs of
// about 1.2, 0.6 and 2.4 noise standard deviations (at least one step), each
// side's floor the largest found, stopping once both exceed `wanted`.
TailFloor tail_floor(const NoiseAt& d, std::int64_t y, double wanted);

}  // namespace tallyd::bounds
