#include "bounds/mixture.h"

#include <algorithm>
#include <cmath>
#include <limits>



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

QuadratureRule choose_rule(const Predictor& predictor, const CountNoise& noise, int nodes, double alpha,
                           int grid_limit, double z_alpha) {
  QuadratureRule r;
  r.hermite_nodes = std::clamp(nodes, 1, kMaxHermiteNodes);
  if (predictor.eta_variance == 0) {
    r.hermite_nodes = 1;
    return r;
  }
  const double sd = std::sqrt(predictor.eta_variance);
  const double z = std::isnan(z_alpha) ? upper_quantile(alpha).z : z_alpha;  // P(Z > z) = alpha
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
  if (grid_limit > 0) {
    const int limit = std::clamp(grid_limit, kMinGridNodeLimit, kMaxGridNodes);
    if (!(wanted <= limit)) {
      r.grid_nodes = limit;
      r.grid_capped = true;
      r.bracket = true;
      // P(Z > H) = kBracketDropped * alpha, and at least 2 beyond z_alpha
      // (only binding for alpha below ~1e-284, where the product is clamped;
      // the mass beyond z_alpha + 2 is then far below 1e-16 alpha anyway).
      r.half_width = std::max(upper_quantile(std::max(kBracketDropped * alpha, 1e-300)).z, z + 2);
      return r;
    }
  }
  r.grid_nodes = wanted >= kMaxGridNodes ? kMaxGridNodes : static_cast<int>(wanted);
  r.grid_capped = wanted > kMaxGridNodes;
  return r;
}

double bracket_excess(const QuadratureRule& rule) {
  const double d = 2 * rule.half_width / (rule.grid_nodes - 1);
  const double c = rule.half_width * d + 0.5 * d * d;
  return c < 1 ? c / (1 - c) : std::numeric_limits<double>::infinity();
}

namespace {

// P(Z <= z) and P(Z > z), each from the side where it is small, so bin
// masses far out keep their relative accuracy.
double lower_tail(double z) { return 0.5 * std::erfc(-z / std::sqrt(2.0)); }
double upper_tail(double z) { return 0.5 * std::erfc(z / std::sqrt(2.0)); }

// P(a < Z <= b), a < b.
double bin_mass(double a, double b) {
  if (b <= 0) return lower_tail(b) - lower_tail(a);
  if (a >= 0) return upper_tail(a) - upper_tail(b);
  return 1 - lower_tail(a) - upper_tail(b);
}

// `out` as `m` with node j's weight set to weight[j] (nodes pooled at zero
// into w0, plus `extra_zero`), and the components clamped at kMaxMean (the
// last ones: every link is non-decreasing) pooled into one.
void reweigh(const Mixture& m, const std::vector<double>& weight, double extra_zero, Mixture& out) {
  out = m;
  const std::size_t nodes = weight.size();
  const std::size_t first = nodes - static_cast<std::size_t>(m.n);  // nodes before it are pooled at zero
  out.w0 = extra_zero;
  for (std::size_t j = 0; j < first; ++j) out.w0 += weight[j];
  int n = 0;
  for (std::size_t i = 0; i < static_cast<std::size_t>(m.n); ++i) {
    const double w = weight[first + i];
    if (n > 0 && m.mu[i] >= kMaxMean && out.mu[static_cast<std::size_t>(n - 1)] >= kMaxMean) {
      out.w[static_cast<std::size_t>(n - 1)] += w;
      continue;
    }
    const std::size_t k = static_cast<std::size_t>(n++);
    out.w[k] = w;
    out.mu[k] = m.mu[i];
    out.size[k] = m.size[i];
    out.q[k] = m.q[i];
    out.inv_mu[k] = m.inv_mu[i];
    out.noise[k] = m.noise[i];
  }
  out.n = n;
}

}  // namespace

void bracket_mixtures(const QuadratureRule& rule, const Mixture& m, Mixture& low, Mixture& high) {
  const int n = rule.grid_nodes;
  const double h = rule.half_width;
  const double d = 2 * h / (n - 1);
  const auto z = [&](int j) { return j == n - 1 ? h : -h + d * j; };
  std::vector<double> bin(static_cast<std::size_t>(n - 1));  // bin j: (z_j, z_{j+1}]
  for (int j = 0; j + 1 < n; ++j) bin[static_cast<std::size_t>(j)] = bin_mass(z(j), z(j + 1));
  std::vector<double> weight(static_cast<std::size_t>(n));
  // High: each bin at its upper node; all of Z <= z_0 at node 0; Z > z_{N-1} dropped.
  weight[0] = lower_tail(z(0));
  for (int j = 1; j < n; ++j) weight[static_cast<std::size_t>(j)] = bin[static_cast<std::size_t>(j - 1)];
  reweigh(m, weight, 0.0, high);
  // Low: each bin at its lower node; all of Z > z_{N-1} at the last node; Z <= z_0 at count 0.
  for (int j = 0; j + 1 < n; ++j) weight[static_cast<std::size_t>(j)] = bin[static_cast<std::size_t>(j)];
  weight[static_cast<std::size_t>(n - 1)] = upper_tail(z(n - 1));
  reweigh(m, weight, lower_tail(z(0)), low);
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
