#include "series/resistant_dispersion.h"

#include <cmath>

#include <boost/math/distributions/normal.hpp>
#include <boost/math/quadrature/gauss_kronrod.hpp>
#include <catch2/catch.hpp>

using namespace tallyd;

namespace {

// kappa(c) straight from its definition, by numerical integration with
// Boost.Math (normal density, Gauss-Kronrod): the reference for the closed form.
double kappa_by_quadrature(double c) {
  const boost::math::normal_distribution<double> z;
  auto density = [&](double r) { return boost::math::pdf(z, r); };
  using Integrator = boost::math::quadrature::gauss_kronrod<double, 61>;
  const double inf = std::numeric_limits<double>::infinity();
  const double mass_below = boost::math::cdf(z, c);
  const double square_below = Integrator::integrate([&](double r) { return r * r * density(r); }, -inf, c, 15, 1e-12);
  const double weight_above = Integrator::integrate([&](double r) { return density(r) / (r * r); }, c, inf, 15, 1e-12);
  const double mass_above = boost::math::cdf(boost::math::complement(z, c));
  // E[v r^2] / E[v] with v = 1 below c and 1/r^2 above.
  return (square_below + mass_above) / (mass_below + weight_above);
}

}  // namespace

TEST_CASE("reweighted dispersion factor: closed form equals the integrals it stands for", "[series]") {
  for (double c : {1.0, 1.5, 2.0, 2.58, 3.0, 5.0, 10.0}) {
    INFO("threshold " << c);
    CHECK(normal_reweighted_dispersion_factor(c) == Approx(kappa_by_quadrature(c)).epsilon(1e-9));
  }
  CHECK(normal_reweighted_dispersion_factor(2.58) == Approx(0.9673).epsilon(1e-3));
  CHECK(normal_reweighted_dispersion_factor(std::numeric_limits<double>::infinity()) == 1.0);
  // A higher threshold down-weights less, so less correction is needed.
  CHECK(normal_reweighted_dispersion_factor(1.0) < normal_reweighted_dispersion_factor(2.58));
  CHECK(normal_reweighted_dispersion_factor(2.58) < normal_reweighted_dispersion_factor(5.0));
}

TEST_CASE("reweighted dispersion factor for counts approaches the normal form as the mean grows", "[series]") {
  const double normal = normal_reweighted_dispersion_factor(2.58);
  double previous = 0;
  for (double mean : {1.0, 5.0, 20.0, 100.0, 1000.0, 9000.0}) {
    const double k = reweighted_dispersion_factor(2.58, mean, 2.0);
    INFO("mean " << mean << " kappa " << k);
    CHECK(k > 0.75);
    CHECK(k < 1.0);
    CHECK(k > previous - 1e-3);  // skew fades with the mean, and with it the extra shrinkage
    previous = k;
  }
  CHECK(reweighted_dispersion_factor(2.58, 9000, 2.0) == Approx(normal).epsilon(3e-3));
  CHECK(reweighted_dispersion_factor(2.58, 2e4, 2.0) == normal);  // beyond 1e4: the closed form
  CHECK(reweighted_dispersion_factor(std::numeric_limits<double>::infinity(), 5, 2) == 1.0);
  CHECK(reweighted_dispersion_factor(2.58, 0, 2) == 1.0);
}

namespace {

// m for a normal residual straight from its definition, E[v Y] / (mu E[v])
// with Y = mu + sd Z, by Boost.Math Gauss-Kronrod quadrature.
double mean_factor_by_quadrature(double c, double mean, double phi) {
  const boost::math::normal_distribution<double> z;
  auto density = [&](double r) { return boost::math::pdf(z, r); };
  using Integrator = boost::math::quadrature::gauss_kronrod<double, 61>;
  const double inf = std::numeric_limits<double>::infinity();
  const double mass_below = boost::math::cdf(z, c);
  const double z_below = Integrator::integrate([&](double r) { return r * density(r); }, -inf, c, 15, 1e-12);
  const double z_above = Integrator::integrate([&](double r) { return density(r) / r; }, c, inf, 15, 1e-12);
  const double weight_above = Integrator::integrate([&](double r) { return density(r) / (r * r); }, c, inf, 15, 1e-12);
  const double sd = std::sqrt(phi * mean);
  const double ev = mass_below + weight_above;
  return (mean * ev + sd * (z_below + z_above)) / (mean * ev);
}

}  // namespace

TEST_CASE("reweighted mean factor: closed form equals the integrals, counts approach it", "[series]") {
  for (double c : {1.0, 1.5, 2.58, 4.0}) {
    INFO("threshold " << c);
    CHECK(normal_reweighted_mean_factor(c, 50, 2) == Approx(mean_factor_by_quadrature(c, 50, 2)).epsilon(1e-9));
  }
  // Only high residuals lose weight: the weighted mean is below the mean,
  // more so at a lower threshold.
  CHECK(normal_reweighted_mean_factor(1.0, 50, 2) < normal_reweighted_mean_factor(2.58, 50, 2));
  CHECK(normal_reweighted_mean_factor(2.58, 50, 2) < 1.0);
  CHECK(normal_reweighted_mean_factor(std::numeric_limits<double>::infinity(), 50, 2) == 1.0);
  for (double mean : {1.0, 5.0, 100.0}) {
    const double m = reweighted_moments(1.0, mean, 2.0).mean_factor;
    INFO("mean " << mean << " m " << m);
    CHECK(m < 1.0);
    CHECK(m > 0.5);
  }
  CHECK(reweighted_moments(1.0, 9000, 2.0).mean_factor ==
        Approx(normal_reweighted_mean_factor(1.0, 9000, 2.0)).epsilon(2e-3));
  // The dispersion factor from the same pass is the one reported alone.
  CHECK(reweighted_moments(2.58, 5, 2).dispersion_factor == reweighted_dispersion_factor(2.58, 5, 2));
}

namespace {

// reweighted_moments summed term by term over every count, each with its
// cube root: the definition in series/resistant_dispersion.h as a plain loop.
ReweightedMoments moments_every_term(double threshold, double mean, double phi) {
  const double sd = std::sqrt(phi * mean);
  const double mu_23 = std::cbrt(mean * mean);
  const double anscombe_scale = 1.5 / (std::pow(mean, 1.0 / 6.0) * std::sqrt(phi));
  const bool poisson = phi <= 1 + 1e-9;
  const double theta = poisson ? 0 : mean / (phi - 1);
  const auto log_pmf = [&](double y) {
    return poisson ? y * std::log(mean) - mean - std::lgamma(y + 1)
                   : std::lgamma(y + theta) - std::lgamma(theta) - std::lgamma(y + 1) +
                         theta * std::log(theta / (mean + theta)) + y * std::log(mean / (mean + theta));
  };
  const double from = std::max(0.0, std::floor(mean - 10 * sd)), to = std::ceil(mean + 15 * sd + 5);
  const double step = std::max(1.0, std::floor((to - from) / 400));
  double mass = 0, weight = 0, weighted_square = 0, weighted_count = 0;
  double pmf = std::exp(log_pmf(from));
  for (double y = from; y <= to; y += step) {
    if (step > 1) pmf = std::exp(log_pmf(y));
    const double p = pmf * step;
    if (step == 1) pmf *= poisson ? mean / (y + 1) : (y + theta) / (y + 1) * (mean / (mean + theta));
    if (!(p > 0)) continue;
    const double s = anscombe_scale * (std::cbrt(y * y) - mu_23);
    const double v = s > threshold ? 1 / (s * s) : 1.0;
    const double r = (y - mean) / sd;
    mass += p;
    weight += p * v;
    weighted_square += p * v * r * r;
    weighted_count += p * v * y;
  }
  return {weighted_square / weight, weighted_count / (weight * mean)};
}

}  // namespace

// The refit skips the cube root of counts that cannot pass the threshold and
// of far-tail terms too small to change any sum; both shortcuts must leave
// the factors as the plain sum has them, bit for bit (lgamma here is
// std::lgamma, the module's lgamma_r: the same glibc code).
TEST_CASE("reweighted moments: the skipped terms change neither factor", "[series]") {
  for (double threshold : {1.0, 2.0, 2.58, 4.0}) {
    for (double mean : {0.3, 1.0, 4.5, 20.0, 87.0, 600.0, 5000.0}) {
      for (double phi : {1.0, 1.7, 4.0}) {
        INFO("threshold " << threshold << " mean " << mean << " phi " << phi);
        const ReweightedMoments fast = reweighted_moments(threshold, mean, phi);
        const ReweightedMoments plain = moments_every_term(threshold, mean, phi);
        CHECK(fast.dispersion_factor == plain.dispersion_factor);
        CHECK(fast.mean_factor == plain.mean_factor);
      }
    }
  }
}

// The cube-root-free test against the residual computed as the refit did
// before it (cbrt): it may only say "within" when the residual is at or
// below the threshold, and it must say so for records well inside.
TEST_CASE("anscombe_surely_within never hides a residual above the threshold", "[series]") {
  int skipped = 0, total = 0;
  for (double threshold : {0.0, 1.0, 2.58, 4.0}) {
    for (double mu : {0.01, 0.3, 1.0, 2.5, 7.0, 40.0, 333.0, 5000.0}) {
      for (double spread : {0.2, 1.0, 1.7, 3.0}) {
        for (int k = 0; k <= 400; ++k) {
          const double y = std::floor(mu + k * (0.05 + 0.02 * std::sqrt(mu)) * spread);
          const double mu23 = std::cbrt(mu * mu);
          const double s = 1.5 * (std::cbrt(y * y) - mu23) / std::sqrt(std::sqrt(mu23)) / spread;
          const bool within = anscombe_surely_within(y, mu, spread, threshold);
          INFO("threshold " << threshold << " mu " << mu << " spread " << spread << " y " << y << " s " << s);
          if (within) CHECK(s <= threshold);
          if (s < threshold * (1 - 1e-6) - 1e-6) CHECK(within);
          skipped += within ? 1 : 0;
          ++total;
        }
      }
    }
  }
  CHECK(skipped > total / 10);  // the grid runs far past the threshold; 8,440 of 51,328 here
}
