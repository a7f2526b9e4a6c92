#include "bounds/random.h"

#include <array>
#include <cmath>

namespace tallyd::bounds {
namespace {

// Inversion by sequential search from 0; about mean + 1 iterations.
std::int64_t poisson_inversion(double mean, double u) {
  double p = std::exp(-mean);
  double cdf = p;
  std::int64_t k = 0;
  while (u > cdf) {
    ++k;
    p *= mean / static_cast<double>(k);
    const double next = cdf + p;
    // The cdf can stall just below 1 by rounding while u is closer to 1;
    // once p no longer moves it, the remaining mass is below resolution.
    if (next == cdf) break;
    cdf = next;
  }
  return k;
}

}  // namespace

double log_factorial(std::int64_t k) {
  constexpr int kTable = 30;
  static const std::array<double, kTable> table = [] {
    std::array<double, kTable> t{};
    t[0] = 0;
    for (int i = 1; i < kTable; ++i) t[i] = t[i - 1] + std::log(static_cast<double>(i));
    return t;
  }();
  if (k < kTable) return table[static_cast<std::size_t>(k)];
  const double n = static_cast<double>(k);
  const double r = 1.0 / n;
  const double r2 = r * r;
  constexpr double kHalfLog2Pi = 0.91893853320467274178;  // log(2 pi) / 2
  return n * std::log(n) - n + 0.5 * std::log(n) + kHalfLog2Pi +
         r * (1.0 / 12 - r2 * (1.0 / 360 - r2 * (1.0 / 1260 - r2 / 1680)));
}

PtrsConstants ptrs_constants(double mean) {
  PtrsConstants c;
  c.slam = std::sqrt(mean);
  c.b = 0.931 + 2.53 * c.slam;
  c.a = -0.059 + 0.02483 * c.b;
  c.inv_alpha = 1.1239 + 1.1328 / (c.b - 3.4);
  c.vr = 0.9277 - 3.6224 / (c.b - 2);
  return c;
}

std::uint64_t stable_hash(std::string_view bytes) {
  std::uint64_t h = 0xcbf29ce484222325ULL;
  for (const char c : bytes) {
    h ^= static_cast<unsigned char>(c);
    h *= 0x100000001b3ULL;
  }
  return h;
}

std::uint64_t splitmix64_next(std::uint64_t& state) {
  std::uint64_t z = (state += 0x9e3779b97f4a7c15ULL);
  z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
  z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
  return z ^ (z >> 31);
}

Rng::Rng(std::uint64_t seed) {
  for (std::uint64_t& word : s_) word = splitmix64_next(seed);
}

Rng Rng::from_state(const std::array<std::uint64_t, 4>& state) {
  Rng rng;
  for (int i = 0; i < 4; ++i) rng.s_[i] = state[static_cast<std::size_t>(i)];
  return rng;
}

Rng Rng::for_record(std::uint64_t seed, std::string_view series, std::int64_t epoch_seconds) {
  // Each input enters through a full splitmix64 mixing step, so nearby
  // seeds, similar series ids and consecutive seconds give unrelated keys.
  std::uint64_t state = seed;
  std::uint64_t key = splitmix64_next(state);
  state = key ^ stable_hash(series);
  key = splitmix64_next(state);
  state = key ^ static_cast<std::uint64_t>(epoch_seconds);
  key = splitmix64_next(state);
  return Rng(key);
}

double Rng::normal() {
  if (has_spare_normal_) {
    has_spare_normal_ = false;
    return spare_normal_;
  }
  double u, v, s;
  do {
    u = 2 * uniform() - 1;
    v = 2 * uniform() - 1;
    s = u * u + v * v;
  } while (s >= 1 || s == 0);
  const double f = std::sqrt(-2 * std::log(s) / s);
  spare_normal_ = v * f;
  has_spare_normal_ = true;
  return u * f;
}

double Rng::gamma(double shape) {
  if (!(shape > 0) || !std::isfinite(shape)) return 0;
  if (shape < 1) {
    // Gamma(a) = Gamma(a + 1) * U^(1/a); written through logs so a tiny
    // shape underflows to 0 instead of evaluating pow with a huge exponent.
    const double g = gamma(shape + 1);
    return g * std::exp(std::log(uniform()) / shape);
  }
  const double d = shape - 1.0 / 3;
  const double c = 1 / std::sqrt(9 * d);
  for (;;) {
    double x, v;
    do {
      x = normal();
      v = 1 + c * x;
    } while (v <= 0);
    v = v * v * v;
    const double u = uniform();
    const double x2 = x * x;
    if (u < 1 - 0.0331 * x2 * x2) return d * v;  // squeeze
    if (std::log(u) < 0.5 * x2 + d * (1 - v + std::log(v))) return d * v;
  }
}

std::int64_t Rng::poisson(double mean) {
  if (!(mean > 0)) return 0;
  if (mean > kMaxPoissonMean) mean = kMaxPoissonMean;
  if (mean < 10) return poisson_inversion(mean, uniform());

  // PTRS, Hormann (1993).
  const auto [slam, b, a, inv_alpha, vr] = ptrs_constants(mean);
  // No accepted k comes near this; it only keeps the conversion defined
  // when us is tiny and the candidate is astronomically large.
  constexpr double kCandidateCap = 4.0e18;
  for (;;) {
    const double u = uniform() - 0.5;
    const double v = uniform();
    const double us = 0.5 - std::fabs(u);
    const double kd = std::floor((2 * a / us + b) * u + mean + 0.43);
    if (us >= 0.07 && v <= vr) return static_cast<std::int64_t>(kd);  // kd >= 0 here for mean >= 10
    if (kd < 0 || kd > kCandidateCap || (us < 0.013 && v > us)) continue;
    const std::int64_t k = static_cast<std::int64_t>(kd);
    // log(mean) only here: most draws return by the quick acceptance above
    // (same value as computing it up front, one log fewer per such draw).
    const double loglam = std::log(mean);
    if (std::log(v) + std::log(inv_alpha) - std::log(a / (us * us) + b) <=
        -mean + kd * loglam - log_factorial(k)) {
      return k;
    }
  }
}

std::int64_t Rng::negbin(double mean, double theta) {
  if (!(theta > 0) || !std::isfinite(theta)) return poisson(mean);
  if (!(mean > 0)) return 0;
  return poisson(gamma(theta) * (mean / theta));
}

}  // namespace tallyd::bounds
