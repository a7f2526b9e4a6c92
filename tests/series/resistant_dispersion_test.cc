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
