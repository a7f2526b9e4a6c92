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

  std::uint64_t next_u64();  // xoshiro256**
  // Uniform on {1, ..., 2^53 - 1} * 2^-53, so in (0, 1) and never exactly 0
  // or 1: the top 53 bits of next_u64, drawn again in the 2^-53 case that
  // they are all zero.
  double uniform();
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

}  // namespace tallyd::bounds
