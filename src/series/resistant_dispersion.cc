#include "series/resistant_dispersion.h"

#include <algorithm>
#include <cmath>

#include "core/log_gamma.h"

namespace tallyd {

double normal_reweighted_dispersion_factor(double threshold) {
  if (!(threshold < HUGE_VAL)) return 1.0;
  const double c = std::max(threshold, 1e-6);
  const double density = std::exp(-0.5 * c * c) / std::sqrt(2 * M_PI);
  const double upper = 0.5 * std::erfc(c / std::sqrt(2.0));
  return (1 - c * density) / (1 - 2 * upper + density / c);
}

double normal_reweighted_mean_factor(double threshold, double mean, double phi) {
  if (!(threshold < HUGE_VAL) || !(mean > 0) || !(phi > 0)) return 1.0;
  const double c = std::max(threshold, 1e-6);
  const double density = std::exp(-0.5 * c * c) / std::sqrt(2 * M_PI);
  const double upper = 0.5 * std::erfc(c / std::sqrt(2.0));
  // E[v Z] = -phi(c) + integral_c^inf phi(z) / z dz, the integral being
  // E1(c^2 / 2) / (2 sqrt(2 pi)) (substitute u = z^2 / 2); E[v] as in the
  // dispersion factor's denominator. E1(x) = -Ei(-x).
  const double e1 = -std::expint(-0.5 * c * c);
  const double vz = -density + e1 / (2 * std::sqrt(2 * M_PI));
  const double ev = 1 - 2 * upper + density / c;
  return 1 + std::sqrt(phi * mean) * vz / (mean * ev);
}

bool anscombe_surely_within(double y, double mu, double spread, double threshold) {
  const double c = threshold * spread / 1.5;
  const double root_mu = std::sqrt(mu);
  const double cut_cubed = mu * mu + 3 * c * mu * root_mu + 3 * c * c * mu + c * c * c * root_mu;
  return y * y < cut_cubed * (1 - 1e-9);
}

ReweightedMoments reweighted_moments(double threshold, double mean, double phi) {
  if (!(threshold < HUGE_VAL) || !(mean > 0) || !(phi > 0) || !std::isfinite(mean) || !std::isfinite(phi))
    return {1.0, 1.0};
  if (mean > 1e4)
    return {normal_reweighted_dispersion_factor(threshold), normal_reweighted_mean_factor(threshold, mean, phi)};
  const double sd = std::sqrt(phi * mean);
  const double mu_23 = std::cbrt(mean * mean);
  const double anscombe_scale = 1.5 / (std::pow(mean, 1.0 / 6.0) * std::sqrt(phi));
  // log P(Y = y): Poisson, or negative binomial with theta = mean / (phi - 1).
  const bool poisson = phi <= 1 + 1e-9;
  const double theta = poisson ? 0 : mean / (phi - 1);
  const double log_q = poisson ? 0 : std::log(mean / (mean + theta));
  const double log_1mq = poisson ? 0 : std::log(theta / (mean + theta));
  const double lgamma_theta = poisson ? 0 : log_gamma(theta);
  const double log_mean = std::log(mean);
  auto log_pmf = [&](double y) {
    return poisson ? y * log_mean - mean - log_gamma(y + 1)
                   : log_gamma(y + theta) - lgamma_theta - log_gamma(y + 1) + theta * log_1mq + y * log_q;
  };
  // From 10 sd below the mean to 15 above (right skew): the mass outside is
  // negligible, and each count there adds at most about 1 to E[v r^2]. Past
  // ~400 counts the sum steps over several counts at a time (a Riemann sum
  // of a smooth summand; the step is at most sd / 16).
  const double from = std::max(0.0, std::floor(mean - 10 * sd)), to = std::ceil(mean + 15 * sd + 5);
  const double step = std::max(1.0, std::floor((to - from) / 400));
  double mass = 0, weight = 0, weighted_square = 0, weighted_count = 0;
  // Count by count, P(Y = y + 1) follows from P(Y = y) by the pmf's ratio
  // (one multiplication instead of three lgamma calls per term).
  double pmf = std::exp(log_pmf(from));
  // s > threshold means y^(2/3) > cut: a count whose square is below cut^3
  // by far more than rounding has v = 1 without its cube root.
  const double cut = mu_23 + threshold / anscombe_scale;
  const double sure_below = cut > 0 ? cut * cut * cut * (1 - 1e-9) : -1.0;
  for (double y = from; y <= to; y += step) {
    if (step > 1) pmf = std::exp(log_pmf(y));
    const double p = pmf * step;
    if (step == 1) pmf *= poisson ? mean / (y + 1) : (y + theta) / (y + 1) * (mean / (mean + theta));
    if (!(p > 0)) continue;
    const double r = (y - mean) / sd;
    double v = 1.0;
    if (!(y * y < sure_below)) {
      // A far-tail term below a quarter of an ulp of every running sum
      // leaves all four unchanged, whatever its v (at most 1): skip it and
      // its cube root (the sums are bit for bit those of adding it).
      const double largest_term = p * std::max({1.0, r * r, y});
      const double smallest_sum = std::min({mass, weight, weighted_square, weighted_count});
      if (largest_term < 0x1p-55 * smallest_sum) continue;
      const double s = anscombe_scale * (std::cbrt(y * y) - mu_23);
      v = s > threshold ? 1 / (s * s) : 1.0;
    }
    mass += p;
    weight += p * v;
    weighted_square += p * v * r * r;
    weighted_count += p * v * y;
  }
  if (!(mass > 0.99) || !(weight > 0))
    return {normal_reweighted_dispersion_factor(threshold), normal_reweighted_mean_factor(threshold, mean, phi)};
  return {weighted_square / weight, weighted_count / (weight * mean)};
}

double reweighted_dispersion_factor(double threshold, double mean, double phi) {
  return reweighted_moments(threshold, mean, phi).dispersion_factor;
}

}  // namespace tallyd
