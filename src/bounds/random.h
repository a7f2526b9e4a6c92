// Reproducible random numbers for predictive simulation.
//
// The standard library's distributions differ between implementations, so
// every draw here is our own algorithm on top of xoshiro256** (Blackman and
// Vigna 2018), seeded by splitmix64. A stream depends only on
// (seed, series id, time), so a replay is byte-identical run to run and on
// any machine, and equals what the service produces for the same record.
// Not thread-safe; one Rng per record being judged.
#pragma once

#include <cstdint>
#include <string_view>

namespace tallyd::bounds {

// FNV-1a 64-bit of the bytes: a stable hash (std::hash is not stable across
// implementations).
std::uint64_t stable_hash(std::string_view bytes);

class Rng {
 public:
  explicit Rng(std::uint64_t seed);
  // The stream for one record: mixes the config seed, the series id and the
  // record's epoch seconds.
  static Rng for_record(std::uint64_t seed, std::string_view series, std::int64_t epoch_seconds);

  std::uint64_t next_u64();
  double uniform();        // in (0, 1), never exactly 0 or 1
  double normal();         // standard normal
  double gamma(double shape);            // Gamma(shape, scale 1), shape > 0
  std::int64_t poisson(double mean);     // mean >= 0; 0 when mean == 0
  // NB2 with mean mu and size theta (Var = mu + mu^2/theta), as a gamma-Poisson mixture.
  std::int64_t negbin(double mean, double theta);

 private:
  std::uint64_t s_[4];
  bool has_spare_normal_ = false;
  double spare_normal_ = 0;
};

}  // namespace tallyd::bounds
