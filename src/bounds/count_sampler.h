// Internal to bounds: the samplers of simulate's inner loop.
//
// Exact in distribution, like Rng's own normal, gamma, poisson and negbin
// (random.h), but cheaper per draw: a ziggurat normal instead of the polar
// method, gamma and NB2 constants worked out once per record where they do
// not change between draws, and inversion for small means with no division
// in the loop. Rng's samplers stay as they are: test data and the benchmark
// feeds are drawn from their streams.
//
// Portability as in random.h: on one platform (one libm) the draws are
// byte-identical run to run; another libm that rounds exp or log differently
// could, very rarely, flip an accept/reject decision.
// Pure functions of the Rng passed in; never throw.
#pragma once

#include <cstdint>

#include "bounds/predictive.h"
#include "bounds/random.h"

namespace tallyd::bounds {

// Standard normal by the ziggurat method (Marsaglia and Tsang 2000, "The
// Ziggurat Method for Generating Random Variables", J. Stat. Softw. 5(8)),
// 128 layers of equal area, the base layer's tail by Marsaglia's (1964)
// exponential rejection. One next_u64 per draw in ~99% of draws: its lowest
// 7 bits pick the layer, bit 7 the sign and the top 53 bits the abscissa, so
// the layer and the value never share bits (the flaw of the original
// generator that Doornik 2005 pointed out).
double ziggurat_normal(Rng& rng);

// Gamma(shape, scale 1) by Marsaglia and Tsang (2000) on ziggurat normals;
// for shape < 1 the draw for shape + 1 times U^(1/shape) (their section 6).
// shape must be finite and > 0; otherwise returns 0.
double gamma_variate(Rng& rng, double shape);

// Poisson(mean): inversion by sequential search from 0 for mean below
// kPoissonInversionBelow, PTRS (Hormann 1993) above, with its acceptance
// test in one log and log k! from a table for k < 256. mean <= 0 or NaN
// gives 0; means above Rng::kMaxPoissonMean are treated as that.
std::int64_t poisson_variate(Rng& rng, double mean);

// Below this mean Poisson and NB2 draws are by inversion, above by PTRS
// (after a gamma draw for NB2): about where the two cost the same
// (inversion's loop grows with the mean, PTRS's cost does not).
inline constexpr double kPoissonInversionBelow = 12;

// The count noise of one record, ready to draw at many means: what noise_at
// works out per mean and does not change between draws is worked out once.
class CountSampler {
 public:
  explicit CountSampler(const CountNoise& noise);

  // One count from the noise at mean mu, as noise_at(noise, mu) describes
  // it: 0 when mu <= kMinMean or NaN, mu clamped to kMaxMean; Poisson, NB2
  // with size theta, or (quasi-Poisson with phi > 1) NB2 with size
  // mu / (phi - 1), i.e. success probability 1 / phi at every mean. NB2 is
  // by inversion for small means, else Poisson(Gamma(size) * mu / size).
  std::int64_t draw(double mu, Rng& rng) const;

 private:
  enum class Kind { poisson, fixed_size, fixed_probability };
  Kind kind_ = Kind::poisson;
  double theta_ = 0;          // fixed_size: NB2 size
  double phi_minus_1_ = 0;    // fixed_probability: size = mu / (phi - 1), and Gamma(size) * (phi - 1) is the Poisson mean
  double log_phi_ = 0;        // fixed_probability: P(0) = phi^-size = exp(-size log phi)
  double q_ = 0;              // fixed_probability: 1 - 1 / phi, the ratio in the pmf recurrence
};

}  // namespace tallyd::bounds
