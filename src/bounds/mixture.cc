#include "bounds/mixture.h"

#include <algorithm>
#include <cmath>
#include <limits>

#include <boost/math/special_functions/erf.hpp>


namespace tallyd::bounds {

double eta_per_mu(glm::Link link, double mu) {
  switch (link) {
    case glm::Link::log: return 1 / mu;
    case glm::Link::sqrt: return 0.5 / std::sqrt(mu);
    case glm::Link::identity: return 1;
  }
  return 1;
}

namespace {

// The count noise's standard deviation carried to the eta scale (delta
// method) at the mean g^{-1}(eta); +inf where the mean is at zero.
double noise_width(const CountNoise& noise, double eta) {
  const NoiseAt d = noise_at(noise, mean_from_eta(noise.link, eta));
  if (d.at_zero) return std::numeric_limits<double>::infinity();
  const double variance = d.mu * (d.poisson ? 1 : 1 + d.mu / d.size);
  return std::sqrt(variance) * eta_per_mu(noise.link, d.mu);
}

}  // namespace

QuadratureRule choose_rule(const Predictor& predictor, const CountNoise& noise, int nodes, double alpha) {
  QuadratureRule r;
  r.hermite_nodes = std::clamp(nodes, 1, kMaxHermiteNodes);
  if (predictor.eta_variance == 0) {
    r.hermite_nodes = 1;
    return r;
  }
  const double sd = std::sqrt(predictor.eta_variance);
  const double z = std::sqrt(2.0) * boost::math::erfc_inv(2 * alpha);  // P(Z > z) = alpha
  // The narrowest noise the bounds depend on: at both bounds' scale on the
  // eta axis. Not at the observed count: a wild count (up to 2^53) would
  // otherwise buy a huge grid for one record; its p-value only needs to be
  // on the right side of alpha, which the bounds settle.
  double width = std::min(noise_width(noise, predictor.eta_mean - z * sd),
                          noise_width(noise, predictor.eta_mean + z * sd));
  r.rho = sd / width;
  if (!(r.rho > kHermiteMaxRho)) return r;  // also NaN: keep Gauss-Hermite
  r.grid = true;
  const double step = std::min(sd, width) / kGridStepsPerWidth;
  const double span = 2 * kGridHalfWidth * sd;
  const double wanted = std::ceil(span / step) + 1;
  r.grid_nodes = wanted >= kMaxGridNodes ? kMaxGridNodes : static_cast<int>(wanted);
  r.grid_capped = wanted > kMaxGridNodes;
  return r;
}

std::optional<double> lognormal_expected(const Predictor& predictor, const CountNoise& noise,
                                         const QuadratureRule& rule) {
  if (noise.link != glm::Link::log || rule.grid) return std::nullopt;
  // log(kMinMean) = -690.77552789821..., log(kMaxMean) = 20.7232658369...,
  // each moved inwards by more than the rounding of a node's eta.
  constexpr double kLowestInside = -690.775527;
  constexpr double kHighestInside = 20.7232658;
  const double reach = predictor.eta_variance == 0
                           ? 0.0
                           : std::sqrt(2 * predictor.eta_variance) * gauss_hermite(rule.hermite_nodes).nodes.back();
  if (!(predictor.eta_mean - reach > kLowestInside && predictor.eta_mean + reach < kHighestInside)) return std::nullopt;
  return std::exp(predictor.eta_mean + 0.5 * predictor.eta_variance);
}

void build_mixture(const Predictor& predictor, const CountNoise& noise, const QuadratureRule& rule, Mixture& m) {
  const std::size_t capacity = static_cast<std::size_t>(rule.grid ? rule.grid_nodes : rule.hermite_nodes);
  for (PerNode* v : {&m.w, &m.mu, &m.size, &m.q, &m.inv_mu}) v->resize(capacity);
  m.noise.resize(capacity);
  const auto add = [&](double weight, double eta) {
    const NoiseAt d = noise_at(noise, mean_from_eta(noise.link, eta));
    if (d.at_zero) {
      m.w0 += weight;
      return;
    }
    const std::size_t i = static_cast<std::size_t>(m.n++);
    m.w[i] = weight;
    m.mu[i] = d.mu;
    m.size[i] = d.size;
    m.q[i] = d.q;
    m.inv_mu[i] = 1 / d.mu;
    m.noise[i] = d;
    m.poisson = d.poisson;
    m.expected += weight * d.mu;
  };
  for_each_node(predictor, rule, add);
  if (const std::optional<double> e = lognormal_expected(predictor, noise, rule)) m.expected = *e;
}

// P(Y = k) of the mixture, from the component pmfs at k.
double mass(const Mixture& m, std::int64_t k, const PerNode& pmf) {
  double s = k == 0 ? m.w0 : 0;
  for (int i = 0; i < m.n; ++i) s += m.w[static_cast<std::size_t>(i)] * pmf[static_cast<std::size_t>(i)];
  return s;
}

// Component pmfs at k -> at k + 1 (from k = -1: the pmfs at 0).
void pmf_up(const Mixture& m, std::int64_t k, PerNode& pmf) {
  const std::size_t n = static_cast<std::size_t>(m.n);
  if (k < 0) {
    pmf.resize(n);
    for (std::size_t i = 0; i < n; ++i) pmf[i] = pmf_zero(m.noise[i]);
    return;
  }
  const double kd = static_cast<double>(k);
  const double inv = 1 / (kd + 1);
  if (m.poisson) {
    for (std::size_t i = 0; i < n; ++i) pmf[i] *= m.mu[i] * inv;  // P(k+1)/P(k) = mu / (k+1)
  } else {
    for (std::size_t i = 0; i < n; ++i) pmf[i] *= (kd + m.size[i]) * m.q[i] * inv;  // (k+r) q / (k+1)
  }
}

// Component pmfs at k -> at k - 1, k >= 1.
void pmf_down(const Mixture& m, std::int64_t k, PerNode& pmf) {
  const std::size_t n = static_cast<std::size_t>(m.n);
  const double kd = static_cast<double>(k);
  if (m.poisson) {
    for (std::size_t i = 0; i < n; ++i) pmf[i] *= kd * m.inv_mu[i];
  } else {
    for (std::size_t i = 0; i < n; ++i) pmf[i] *= kd / ((kd - 1 + m.size[i]) * m.q[i]);
  }
}

Probe probe(const Mixture& m, std::int64_t k, PerNode& pmf) {
  Probe p{m.w0, 0};
  pmf.resize(static_cast<std::size_t>(m.n));
  for (std::size_t i = 0; i < static_cast<std::size_t>(m.n); ++i) {
    const Tails t = tails_at(m.noise[i], k);
    p.cdf += m.w[i] * t.cdf;
    p.sf += m.w[i] * t.sf;
    pmf[i] = t.pmf;
  }
  return p;
}

}  // namespace tallyd::bounds
