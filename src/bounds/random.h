// Reproducible random numbers for predictive simulation.
//
// The standard library's distributions differ between implementations, so
// every draw here is our own algorithm on top of xoshiro256** (Blackman and
// Vigna 2018), seeded by splitmix64. A stream depends only on
// (seed, series id, time), so a replay gives the same draws run to run and
// equals what the service produced for the same record.
//
// Portability of the stream: next_u64 and uniform are exact integer/IEEE
// arithmetic, identical everywhere. normal, gamma, poisson and negbin also
// call std::log / std::exp / std::sqrt; sqrt is exactly rounded by IEEE 754,
// log and exp are not required to be, so two C libraries that round one of
// them differently could, very rarely, flip an accept/reject decision. On
// one platform (one libm) the draws are byte-identical.
//
// Not thread-safe; one Rng per record being judged. Never throws.
#pragma once

#include <array>
#include <cstdint>
#include <string_view>

namespace tallyd::bounds {

// FNV-1a 64-bit of the bytes (offset basis 0xcbf29ce484222325, prime
// 0x100000001b3): a stable hash, unlike std::hash.
std::uint64_t stable_hash(std::string_view bytes);

// log(k!) for k >= 0 without std::lgamma, whose accuracy differs between C
// libraries: exact sums of logs for k < 30, Stirling's series beyond
// (truncation error below 1 / (1188 k^9) < 1e-16 for k >= 30).
double log_factorial(std::int64_t k);

// The constants of Hormann's (1993) PTRS Poisson sampler for a mean of 10
// or more, as given in the paper; shared by Rng::poisson and the
// simulation's count sampler (count_sampler.h), whose acceptance tests differ.
struct PtrsConstants {
  double slam = 0;  // sqrt(mean)
  double b = 0;
  double a = 0;
  double inv_alpha = 0;
  double vr = 0;
};
PtrsConstants ptrs_constants(double mean);

// One step of splitmix64 (Steele, Lea and Flood 2014; Vigna's splitmix64.c):
// advances `state` by the golden-ratio increment and returns the mixed value.
std::uint64_t splitmix64_next(std::uint64_t& state);

class Rng {
 public:
  // The xoshiro256** state is four successive splitmix64 outputs from `seed`
  // (the seeding the xoshiro authors recommend); never all zero.
  explicit Rng(std::uint64_t seed);
  // The raw xoshiro256** state, for checking against reference vectors.
  // Precondition: not all four words zero (an all-zero state stays zero).
  static Rng from_state(const std::array<std::uint64_t, 4>& state);
  // The stream for one record: splitmix64 chain over the config seed, the
  // stable_hash of the series id and the record's epoch seconds, so changing
  // any one of them gives an unrelated stream.
  static Rng for_record(std::uint64_t seed, std::string_view series, std::int64_t epoch_seconds);

  inline std::uint64_t next_u64();  // xoshiro256** (inline below: the samplers call it in their inner loops)
  // Uniform on {1, ..., 2^53 - 1} * 2^-53, so in (0, 1) and never exactly 0
  // or 1: the top 53 bits of next_u64, drawn again in the 2^-53 case that
  // they are all zero.
  inline double uniform();
  // Standard normal by the Marsaglia polar method; the second value of each
  // accepted pair is kept and returned by the next call.
  double normal();
  // Gamma(shape, scale 1) by Marsaglia and Tsang (2000); for shape < 1 the
  // draw for shape + 1 is multiplied by U^(1/shape) (their section 6).
  // shape must be finite and > 0; otherwise returns 0.
  double gamma(double shape);
  // Poisson(mean): inversion by sequential search for mean < 10, PTRS
  // (Hormann 1993, transformed rejection with squeeze) for mean >= 10.
  // mean <= 0 or NaN gives 0; means above kMaxPoissonMean (including +inf)
  // are treated as kMaxPoissonMean.
  std::int64_t poisson(double mean);
  // NB2 with mean mu and size theta (Var = mu + mu^2/theta), as
  // Poisson(Gamma(theta, scale mu/theta)). theta that is not a finite
  // positive number (0, +inf, NaN) means the Poisson limit.
  std::int64_t negbin(double mean, double theta);

  // 2^52: above this a double no longer resolves the count scale's units.
  static constexpr double kMaxPoissonMean = 4503599627370496.0;

 private:
  Rng() = default;

  std::uint64_t s_[4] = {0, 0, 0, 0};
  bool has_spare_normal_ = false;
  double spare_normal_ = 0;
};

inline std::uint64_t Rng::next_u64() {
  const auto rotl = [](std::uint64_t x, int k) { return (x << k) | (x >> (64 - k)); };
  const std::uint64_t result = rotl(s_[1] * 5, 7) * 9;
  const std::uint64_t t = s_[1] << 17;
  s_[2] ^= s_[0];
  s_[3] ^= s_[1];
  s_[1] ^= s_[2];
  s_[0] ^= s_[3];
  s_[2] ^= t;
  s_[3] = rotl(s_[3], 45);
  return result;
}

inline double Rng::uniform() {
  // k * 2^-53 is exact for every 53-bit k. Offsetting by half a step instead
  // would not do: (2^53 - 1 + 0.5) * 2^-53 = 1 - 2^-54 is not a double and
  // rounds to 1.
  constexpr double kTwoToMinus53 = 1.0 / 9007199254740992.0;
  for (;;) {
    const std::uint64_t k = next_u64() >> 11;
    if (k != 0) return static_cast<double>(k) * kTwoToMinus53;
  }
}

}  // namespace tallyd::bounds
