// Internal to bounds: the count noise at one mean, and its exact tails.
//
// Shared by simulate, quadrature and noise_cdf so the three agree on what
// Poisson, NB2 and quasi-Poisson noise mean and on the clamps below.
// Pure functions; never throw (Boost.Math errors are turned into values).
#pragma once

#include <cstdint>

#include "bounds/predictive.h"
#include "glm/family.h"

namespace tallyd::bounds {

// Means above 1e9 are treated as 1e9. No count process tallyd watches
// comes near it; a larger mean is a runaway fit. It also bounds the cost of a
// tail below the mean, which Boost.Math 1.74 sums in O(sqrt(mu)) terms
// (~0.2 ms per call at 1e9), and keeps the tails accurate (further up,
// a double no longer resolves neighbouring counts' probabilities).
inline constexpr double kMaxMean = 1e9;
// Count searches stop at 2^53, the largest range of exactly representable integers.
inline constexpr std::int64_t kMaxCount = std::int64_t{1} << 53;
// A mean at or below this is all mass at zero (P(Y > 0) <= mu is below any
// probability we resolve), which keeps 1/mu and mu/(r + mu) finite and nonzero.
inline constexpr double kMinMean = 1e-300;

// mu = g^{-1}(eta), clamped into [0, kMaxMean]: exp for log, max(eta, 0)^2
// for sqrt, max(eta, 0) for identity. NaN stays NaN.
double mean_from_eta(glm::Link link, double eta);

// The noise distribution at one mean.
struct NoiseAt {
  bool at_zero = true;  // mu <= kMinMean: P(Y = 0) = 1
  bool poisson = true;  // otherwise NB2 with `size`
  double mu = 0;        // mean, in (kMinMean, kMaxMean] unless at_zero
  double size = 0;      // NB2 size r (Var = mu + mu^2 / r); unused for Poisson
  double p = 1;         // NB2 r / (r + mu)
  double q = 0;         // NB2 mu / (r + mu) = 1 - p, computed without cancellation
};

// Poisson when the family is poisson, quasipoisson with phi <= 1 (or not
// finite), or negbin with theta not a finite positive number. Quasi-Poisson
// with phi > 1 is NB2 with size mu / (phi - 1), so Var = phi * mu.
// mu is clamped as in mean_from_eta; NaN mu gives at_zero.
NoiseAt noise_at(const CountNoise& noise, double mu);

// P(Y = 0): exp(-mu) or p^r.
double pmf_zero(const NoiseAt& d);

// cdf = P(Y <= k), sf = P(Y > k), pmf = P(Y = k) for k >= 0. cdf and sf
// each keep near full relative accuracy (the smaller one is computed
// directly, the complement only when it is not close to 1). A few
// Boost.Math special-function calls; the costly part of a probe.
struct Tails {
  double cdf;
  double sf;
  double pmf;
};
Tails tails_at(const NoiseAt& d, std::int64_t k);

}  // namespace tallyd::bounds
