#include "bounds/count_noise.h"

#include <algorithm>
#include <cmath>
#include <limits>

#include <boost/math/policies/policy.hpp>
#include <boost/math/special_functions/beta.hpp>
#include <boost/math/special_functions/gamma.hpp>

namespace tallyd::bounds {
namespace {

namespace bmp = boost::math::policies;
// No exceptions from Boost on the numeric path: every argument is checked
// before the call, and anything left over becomes a value. Doubles are not
// promoted to long double: a few ulps of accuracy for a large speed-up.
using Policy = bmp::policy<bmp::domain_error<bmp::ignore_error>, bmp::pole_error<bmp::ignore_error>,
                           bmp::overflow_error<bmp::ignore_error>, bmp::underflow_error<bmp::ignore_error>,
                           bmp::denorm_error<bmp::ignore_error>, bmp::evaluation_error<bmp::ignore_error>,
                           bmp::rounding_error<bmp::ignore_error>, bmp::indeterminate_result_error<bmp::ignore_error>,
                           bmp::promote_float<false>, bmp::promote_double<false>>;

// Above this the directly computed tail's complement is close enough to 1
// that 1 - x would lose digits of the other tail; compute that one directly too.
constexpr double kComplementLimit = 0.9;

}  // namespace

double mean_from_eta(glm::Link link, double eta) {
  double mu = 0;
  switch (link) {
    case glm::Link::log: mu = std::exp(eta); break;
    case glm::Link::sqrt: mu = eta > 0 ? eta * eta : 0; break;
    case glm::Link::identity: mu = eta > 0 ? eta : 0; break;
  }
  if (std::isnan(eta)) return eta;
  return std::min(mu, kMaxMean);
}

NoiseAt noise_at(const CountNoise& noise, double mu) {
  NoiseAt d;
  if (!(mu > kMinMean)) return d;  // includes NaN
  d.at_zero = false;
  d.mu = std::min(mu, kMaxMean);
  double size = std::numeric_limits<double>::infinity();
  switch (noise.family) {
    case glm::Family::poisson: break;
    case glm::Family::quasipoisson:
      if (noise.dispersion > 1 && std::isfinite(noise.dispersion)) size = d.mu / (noise.dispersion - 1);
      break;
    case glm::Family::negbin:
      if (noise.theta > 0 && std::isfinite(noise.theta)) size = noise.theta;
      break;
  }
  if (std::isfinite(size) && size > 0) {
    d.poisson = false;
    d.size = size;
    d.p = size / (size + d.mu);
    d.q = d.mu / (size + d.mu);
  }
  return d;
}

double pmf_zero(const NoiseAt& d) {
  if (d.at_zero) return 1;
  if (d.poisson) return std::exp(-d.mu);
  // p^r through log1p(-q) keeps accuracy when q is tiny (p near 1).
  return std::exp(d.size * std::log1p(-d.q));
}

Tails tails_at(const NoiseAt& d, std::int64_t k) {
  if (k < 0) return {0, 1, 0};
  if (d.at_zero) return {1, 0, k == 0 ? 1.0 : 0.0};
  const double a = static_cast<double>(k) + 1;
  Tails t{};
  // Which tail is the smaller one: below the mean the cdf, above it the sf.
  const bool below_mean = static_cast<double>(k) < d.mu;
  if (d.poisson) {
    // P(Y <= k) = Q(k + 1, mu), P(Y > k) = P(k + 1, mu) (regularised incomplete gamma).
    if (below_mean) {
      t.cdf = boost::math::gamma_q(a, d.mu, Policy());
      t.sf = t.cdf > kComplementLimit ? boost::math::gamma_p(a, d.mu, Policy()) : 1 - t.cdf;
    } else {
      t.sf = boost::math::gamma_p(a, d.mu, Policy());
      t.cdf = t.sf > kComplementLimit ? boost::math::gamma_q(a, d.mu, Policy()) : 1 - t.sf;
    }
    t.pmf = boost::math::gamma_p_derivative(a, d.mu, Policy());
  } else {
    // P(Y <= k) = I_p(r, k + 1), P(Y > k) = 1 - I_p(r, k + 1) (regularised incomplete beta).
    if (below_mean) {
      t.cdf = boost::math::ibeta(d.size, a, d.p, Policy());
      t.sf = t.cdf > kComplementLimit ? boost::math::ibetac(d.size, a, d.p, Policy()) : 1 - t.cdf;
    } else {
      t.sf = boost::math::ibetac(d.size, a, d.p, Policy());
      t.cdf = t.sf > kComplementLimit ? boost::math::ibeta(d.size, a, d.p, Policy()) : 1 - t.sf;
    }
    t.pmf = d.p / (d.size + static_cast<double>(k)) * boost::math::ibeta_derivative(d.size, a, d.p, Policy());
  }
  return t;
}

double noise_cdf(const CountNoise& noise, double mu, std::int64_t k) {
  if (k < 0) return 0;
  if (std::isnan(mu)) return mu;
  if (mu == std::numeric_limits<double>::infinity()) return 0;
  return tails_at(noise_at(noise, mu), k).cdf;
}

}  // namespace tallyd::bounds
