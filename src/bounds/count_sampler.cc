#include "bounds/count_sampler.h"

#include <algorithm>
#include <array>
#include <cmath>

#include "bounds/count_noise.h"

namespace tallyd::bounds {
namespace {

// The ziggurat of f(x) = exp(-x^2 / 2), x >= 0 (the normal density up to
// its constant): kLayers pieces of equal area v. Layer 0 is the base strip
// [0, x[0]) x [0, f(r)), x[0] = v / f(r), of which [0, r) lies under f and
// the rest stands for the tail beyond r = x[1]; layer i >= 1 is the box
// [0, x[i]) x [f(x[i]), f(x[i + 1])), with x[kLayers] = 0 and f(0) = 1.
constexpr int kLayers = 128;

struct Ziggurat {
  double r = 0;
  std::array<double, kLayers + 1> x{};  // layer widths, decreasing; x[kLayers] = 0
  std::array<double, kLayers + 1> f{};  // f(x[i]) for i >= 1; f[kLayers] = 1
};

double density(double x) { return std::exp(-0.5 * x * x); }

// Builds the layers from r; returns how far the top layer's area misses v
// (0 for the r that closes the ziggurat; negative when r is too small).
double build(double r, Ziggurat& z) {
  // Area under f beyond r: sqrt(pi / 2) erfc(r / sqrt(2)).
  const double v = r * density(r) + 1.2533141373155002512 * std::erfc(r / 1.4142135623730950488);
  z.r = r;
  z.x[0] = v / density(r);
  z.x[1] = r;
  z.f[1] = density(r);
  for (int i = 1; i + 1 < kLayers; ++i) {
    z.f[i + 1] = z.f[i] + v / z.x[i];
    if (!(z.f[i + 1] < 1)) return -1;  // the boxes reach the top too early
    z.x[i + 1] = std::sqrt(-2 * std::log(z.f[i + 1]));
  }
  z.f[kLayers] = 1;
  z.x[kLayers] = 0;
  return z.x[kLayers - 1] * (1 - z.f[kLayers - 1]) - v;
}

// r by bisection so that all kLayers layers have the same area (to ~1e-15
// of v, below what any test of the draws could see). Marsaglia and Tsang
// give r = 3.442619855899 for 128 layers; the bisection lands within 1e-11 of it.
Ziggurat make_ziggurat() {
  Ziggurat z;
  double low = 3.3, high = 3.6;
  for (int i = 0; i < 100; ++i) {
    const double mid = 0.5 * (low + high);
    if (build(mid, z) < 0) low = mid;
    else high = mid;
  }
  build(high, z);
  return z;
}

const Ziggurat& ziggurat() {
  static const Ziggurat z = make_ziggurat();
  return z;
}

// log k! for the PTRS acceptance test; log_factorial (random.h) beyond.
constexpr int kLogFactorials = 256;

const std::array<double, kLogFactorials>& log_factorials() {
  static const std::array<double, kLogFactorials> table = [] {
    std::array<double, kLogFactorials> t{};
    for (int k = 0; k < kLogFactorials; ++k) t[static_cast<std::size_t>(k)] = log_factorial(k);
    return t;
  }();
  return table;
}

double log_factorial_fast(std::int64_t k) {
  return k < kLogFactorials ? log_factorials()[static_cast<std::size_t>(k)] : log_factorial(k);
}

// Sequential search for the first k with u <= P(Y <= k), given P(Y = 0) =
// `first` and P(Y = k + 1) = P(Y = k) * ratio(k). About mean + 1 steps; the
// ratio does not depend on the running pmf, so only one multiply a step is
// on the loop's critical path.
template <class Ratio>
std::int64_t search_from_zero(double first, double u, Ratio ratio) {
  double p = first;
  double cdf = p;
  std::int64_t k = 0;
  while (u > cdf) {
    p *= ratio(k);
    ++k;
    const double next = cdf + p;
    // The cdf can stall just below 1 by rounding while u is closer to 1;
    // once p no longer moves it, the remaining mass is below resolution.
    if (next == cdf) break;
    cdf = next;
  }
  return k;
}

// NB2 with size r and q = mu / (r + mu) by inversion from P(0) = (1 - q)^r:
// P(k + 1) = P(k) q (r + k) / (k + 1).
std::int64_t nb_inversion(double size, double q, double first, double u) {
  return search_from_zero(first, u, [size, q](std::int64_t k) {
    const double kd = static_cast<double>(k);
    return q * (size + kd) / (kd + 1);
  });
}

// Marsaglia and Tsang's constants for shape >= 1: d = shape - 1/3, c = 1 / sqrt(9 d).
double gamma_at_least_one(Rng& rng, double d, double c) {
  for (;;) {
    double x, v;
    do {
      x = ziggurat_normal(rng);
      v = 1 + c * x;
    } while (v <= 0);
    v = v * v * v;
    const double u = rng.uniform();
    const double x2 = x * x;
    if (u < 1 - 0.0331 * x2 * x2) return d * v;  // squeeze
    if (std::log(u) < 0.5 * x2 + d * (1 - v + std::log(v))) return d * v;
  }
}

}  // namespace

double ziggurat_normal(Rng& rng) {
  const Ziggurat& z = ziggurat();
  constexpr double kTwoToMinus53 = 1.0 / 9007199254740992.0;
  for (;;) {
    const std::uint64_t bits = rng.next_u64();
    const int layer = static_cast<int>(bits & (kLayers - 1));
    const bool negative = (bits & kLayers) != 0;
    // Uniform on [0, 1) from the top 53 bits, independent of the 8 above.
    const double x = static_cast<double>(bits >> 11) * kTwoToMinus53 * z.x[static_cast<std::size_t>(layer)];
    if (x < z.x[static_cast<std::size_t>(layer) + 1]) return negative ? -x : x;  // inside the next layer's width: under f
    if (layer == 0) {
      // The tail beyond r (Marsaglia 1964): r + E1 / r, accepted when 2 E2 > (E1 / r)^2.
      double t, e;
      do {
        t = -std::log(rng.uniform()) / z.r;
        e = -std::log(rng.uniform());
      } while (e + e <= t * t);
      return negative ? -(z.r + t) : z.r + t;
    }
    // The wedge of layer i: accept under f at a uniform height in the box.
    const double low = z.f[static_cast<std::size_t>(layer)];
    const double high = z.f[static_cast<std::size_t>(layer) + 1];
    if (low + rng.uniform() * (high - low) < density(x)) return negative ? -x : x;
  }
}

double gamma_variate(Rng& rng, double shape) {
  if (!(shape > 0) || !std::isfinite(shape)) return 0;
  if (shape < 1) {
    // Gamma(a) = Gamma(a + 1) * U^(1/a); written through logs so a tiny
    // shape underflows to 0 instead of evaluating pow with a huge exponent.
    const double d = shape + 1 - 1.0 / 3;
    const double g = gamma_at_least_one(rng, d, 1 / std::sqrt(9 * d));
    return g * std::exp(std::log(rng.uniform()) / shape);
  }
  const double d = shape - 1.0 / 3;
  return gamma_at_least_one(rng, d, 1 / std::sqrt(9 * d));
}

std::int64_t poisson_variate(Rng& rng, double mean) {
  if (!(mean > 0)) return 0;
  if (mean > Rng::kMaxPoissonMean) mean = Rng::kMaxPoissonMean;
  if (mean < kPoissonInversionBelow) {
    return search_from_zero(std::exp(-mean), rng.uniform(),
                            [mean](std::int64_t k) { return mean / static_cast<double>(k + 1); });
  }

  // PTRS, Hormann (1993).
  const auto [slam, b, a, inv_alpha, vr] = ptrs_constants(mean);
  // No accepted k comes near this; it only keeps the conversion defined
  // when us is tiny and the candidate is astronomically large.
  constexpr double kCandidateCap = 4.0e18;
  for (;;) {
    const double u = rng.uniform() - 0.5;
    const double v = rng.uniform();
    const double us = 0.5 - std::fabs(u);
    const double kd = std::floor((2 * a / us + b) * u + mean + 0.43);
    if (us >= 0.07 && v <= vr) return static_cast<std::int64_t>(kd);  // kd >= 0 here for mean >= 10
    if (kd < 0 || kd > kCandidateCap || (us < 0.013 && v > us)) continue;
    const std::int64_t k = static_cast<std::int64_t>(kd);
    // The paper's test log(v inv_alpha / (a / us^2 + b)) <= -mean + k log(mean) - log k!,
    // its three logs on the left taken as one (every factor is positive).
    if (std::log(v * inv_alpha / (a / (us * us) + b)) <= -mean + kd * std::log(mean) - log_factorial_fast(k)) {
      return k;
    }
  }
}

CountSampler::CountSampler(const CountNoise& noise) {
  switch (noise.family) {
    case glm::Family::poisson: break;
    case glm::Family::quasipoisson:
      if (noise.dispersion > 1 && std::isfinite(noise.dispersion)) {
        kind_ = Kind::fixed_probability;
        phi_minus_1_ = noise.dispersion - 1;
        log_phi_ = std::log(noise.dispersion);
        q_ = phi_minus_1_ / noise.dispersion;
      }
      break;
    case glm::Family::negbin:
      if (noise.theta > 0 && std::isfinite(noise.theta)) {
        kind_ = Kind::fixed_size;
        theta_ = noise.theta;
      }
      break;
  }
}

std::int64_t CountSampler::draw(double mu, Rng& rng) const {
  if (!(mu > kMinMean)) return 0;  // includes NaN
  mu = std::min(mu, kMaxMean);
  switch (kind_) {
    case Kind::poisson: break;
    case Kind::fixed_size: {
      // As noise_at: NB2 with size theta, q = mu / (theta + mu).
      if (mu < kPoissonInversionBelow) {
        const double q = mu / (theta_ + mu);
        return nb_inversion(theta_, q, std::exp(theta_ * std::log1p(-q)), rng.uniform());
      }
      return poisson_variate(rng, gamma_variate(rng, theta_) * (mu / theta_));
    }
    case Kind::fixed_probability: {
      // As noise_at: size mu / (phi - 1), Poisson when that is not a finite
      // positive number; q = (phi - 1) / phi and P(0) = phi^-size at every mean.
      const double size = mu / phi_minus_1_;
      if (!(size > 0) || !std::isfinite(size)) break;
      if (mu < kPoissonInversionBelow) return nb_inversion(size, q_, std::exp(-size * log_phi_), rng.uniform());
      // Gamma(size) * mu / size = Gamma(size) * (phi - 1).
      return poisson_variate(rng, gamma_variate(rng, size) * phi_minus_1_);
    }
  }
  return poisson_variate(rng, mu);
}

}  // namespace tallyd::bounds
