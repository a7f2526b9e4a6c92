#include "bounds/count_noise.h"

#include <cmath>
#include <limits>

#include <boost/math/distributions/negative_binomial.hpp>
#include <boost/math/distributions/poisson.hpp>
#include <catch2/catch.hpp>

#include "bounds/predictive.h"

namespace tallyd::bounds {
namespace {

using glm::Family;
using glm::Link;

bool close(double got, double want, double relative) {
  return std::fabs(got - want) <= relative * std::fabs(want) || (got == 0 && want == 0);
}

// Boost.Math with its default policy (double promoted to long double
// internally) is the reference; tallyd calls it without promotion, for
// speed. Against 50-digit values that costs up to ~3e-12 relative for
// probabilities above 1e-30, and up to ~4e-10 around 1e-33 at means of 1e6
// (measured while writing this module); hence two tolerances.
constexpr double kBoostAgreement = 1e-11;
double agreement(double reference) { return reference > 1e-30 ? kBoostAgreement : 1e-9; }

TEST_CASE("Poisson noise_cdf: closed forms and Boost.Math", "[bounds]") {
  const CountNoise poisson{Family::poisson, Link::log, 1, 0};
  // P(Y <= 0) = e^-mu, P(Y <= 2) = e^-mu (1 + mu + mu^2/2): the Poisson pmf
  // summed by hand (definition).
  for (const double mu : {0.01, 0.7, 3.0, 12.5}) {
    CHECK(close(noise_cdf(poisson, mu, 0), std::exp(-mu), 1e-14));
    CHECK(close(noise_cdf(poisson, mu, 2), std::exp(-mu) * (1 + mu + mu * mu / 2), 1e-14));
  }
  for (const double mu : {1e-6, 0.3, 4.0, 30.0, 1000.0, 2.5e5}) {
    const boost::math::poisson_distribution<> d(mu);
    const double sd = std::sqrt(mu);
    for (const double z : {-6.0, -3.0, -1.0, 0.0, 1.0, 3.0, 6.0, 12.0}) {
      const double kd = std::floor(mu + z * sd);
      if (kd < 0) continue;
      const auto k = static_cast<std::int64_t>(kd);
      INFO("mu " << mu << " k " << k);
      CHECK(close(noise_cdf(poisson, mu, k), boost::math::cdf(d, kd), agreement(boost::math::cdf(d, kd))));
      // The internal tails keep the small side accurate, both ways.
      const Tails t = tails_at(noise_at(poisson, mu), k);
      const double sf = boost::math::cdf(boost::math::complement(d, kd));
      CHECK(close(t.sf, sf, agreement(sf)));
      CHECK(close(t.pmf, boost::math::pdf(d, kd), agreement(sf)));
    }
  }
}

TEST_CASE("NB2 noise_cdf: geometric closed form and Boost.Math", "[bounds]") {
  // theta = 1 is the geometric distribution: P(Y <= k) = 1 - (mu/(1+mu))^(k+1) (definition).
  for (const double mu : {0.5, 4.0, 80.0}) {
    const CountNoise geometric{Family::negbin, Link::log, 1, 1.0};
    for (const std::int64_t k : {0, 1, 5, 40}) {
      CHECK(close(noise_cdf(geometric, mu, k), 1 - std::pow(mu / (1 + mu), static_cast<double>(k + 1)), 1e-13));
    }
  }
  for (const double theta : {0.2, 2.0, 35.0, 1e6}) {
    const CountNoise negbin{Family::negbin, Link::log, 1, theta};
    for (const double mu : {0.3, 6.0, 150.0, 2e4}) {
      // Boost's negative_binomial(r, p): failures before the r-th success;
      // NB2(mu, theta) is r = theta, p = theta / (theta + mu).
      const boost::math::negative_binomial_distribution<> d(theta, theta / (theta + mu));
      const double sd = std::sqrt(mu + mu * mu / theta);
      for (const double z : {-2.0, 0.0, 1.0, 4.0, 10.0}) {
        const double kd = std::floor(mu + z * sd);
        if (kd < 0) continue;
        const auto k = static_cast<std::int64_t>(kd);
        INFO("theta " << theta << " mu " << mu << " k " << k);
        CHECK(close(noise_cdf(negbin, mu, k), boost::math::cdf(d, kd), kBoostAgreement));
        const Tails t = tails_at(noise_at(negbin, mu), k);
        const double sf = boost::math::cdf(boost::math::complement(d, kd));
        CHECK(close(t.sf, sf, agreement(sf)));
        CHECK(close(t.pmf, boost::math::pdf(d, kd), agreement(sf)));
      }
    }
  }
}

TEST_CASE("quasi-Poisson noise is NB2 with variance phi * mu", "[bounds]") {
  for (const double phi : {1.5, 4.0}) {
    const CountNoise quasi{Family::quasipoisson, Link::log, phi, 0};
    for (const double mu : {0.2, 9.0, 400.0}) {
      // size r = mu / (phi - 1) gives p = r / (r + mu) = 1 / phi.
      const boost::math::negative_binomial_distribution<> d(mu / (phi - 1), 1 / phi);
      CHECK(close(boost::math::variance(d), phi * mu, 1e-13));
      for (const std::int64_t k : {0, 3, 10, 500}) {
        CHECK(close(noise_cdf(quasi, mu, k), boost::math::cdf(d, static_cast<double>(k)), kBoostAgreement));
      }
    }
  }
}

TEST_CASE("noise_cdf edge cases never throw", "[bounds]") {
  const CountNoise poisson{Family::poisson, Link::log, 1, 0};
  const CountNoise negbin{Family::negbin, Link::log, 1, 2.0};
  const CountNoise quasi{Family::quasipoisson, Link::log, 3.0, 0};
  for (const CountNoise& noise : {poisson, negbin, quasi}) {
    CHECK(noise_cdf(noise, 5.0, -1) == 0);
    CHECK(noise_cdf(noise, 0.0, 0) == 1);  // all mass at 0
    CHECK(noise_cdf(noise, -3.0, 2) == 1);
    CHECK(noise_cdf(noise, 5.0, std::int64_t{1} << 60) == 1);
    CHECK(noise_cdf(noise, std::numeric_limits<double>::infinity(), 10) == 0);
    CHECK(std::isnan(noise_cdf(noise, std::nan(""), 10)));
    // A runaway mean is clamped to kMaxMean.
    CHECK(noise_cdf(noise, 1e300, 1000) == noise_cdf(noise, kMaxMean, 1000));
  }
  // phi <= 1 and theta 0 / infinite are the Poisson limit.
  const double want = boost::math::cdf(boost::math::poisson_distribution<>(7.0), 9.0);
  CHECK(close(noise_cdf({Family::quasipoisson, Link::log, 1.0, 0}, 7.0, 9), want, kBoostAgreement));
  CHECK(close(noise_cdf({Family::quasipoisson, Link::log, 0.6, 0}, 7.0, 9), want, kBoostAgreement));
  CHECK(close(noise_cdf({Family::negbin, Link::log, 1, 0}, 7.0, 9), want, kBoostAgreement));
  CHECK(close(noise_cdf({Family::negbin, Link::log, 1, INFINITY}, 7.0, 9), want, kBoostAgreement));
}

TEST_CASE("pmf_zero and the inverse links", "[bounds]") {
  CHECK(close(pmf_zero(noise_at({Family::poisson, Link::log, 1, 0}, 2.0)), std::exp(-2.0), 1e-15));
  // NB2 P(Y = 0) = (theta / (theta + mu))^theta (definition).
  CHECK(close(pmf_zero(noise_at({Family::negbin, Link::log, 1, 3.0}, 2.0)), std::pow(3.0 / 5.0, 3.0), 1e-14));
  CHECK(pmf_zero(noise_at({Family::negbin, Link::log, 1, 3.0}, 0.0)) == 1);

  CHECK(mean_from_eta(Link::log, 0.0) == 1);
  CHECK(close(mean_from_eta(Link::log, 2.0), std::exp(2.0), 1e-15));
  CHECK(mean_from_eta(Link::log, 1000.0) == kMaxMean);
  CHECK(mean_from_eta(Link::sqrt, 3.0) == 9);
  CHECK(mean_from_eta(Link::sqrt, -3.0) == 0);
  CHECK(mean_from_eta(Link::identity, 4.5) == 4.5);
  CHECK(mean_from_eta(Link::identity, -4.5) == 0);
  CHECK(std::isnan(mean_from_eta(Link::identity, std::nan(""))));
}

}  // namespace
}  // namespace tallyd::bounds
