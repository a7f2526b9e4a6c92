// Internal to bounds: the quadrature mixture over eta* and its exact CDF
// pieces, shared by the bound search (quadrature.cc) and the screen
// (screen.cc).
//
// The predictive distribution is approximated by the finite mixture
// sum_i w_i NoiseAt(mu_i), mu_i = g^{-1}(eta_i), over the nodes eta_i of a
// rule chosen per call (choose_rule): Gauss-Hermite, or a trapezoid grid in
// eta when the count noise is narrow next to sd(eta*). Both rules are
// symmetric about eta_mean, so the components with eta_i >= eta_mean carry
// at least half of the weight (exactly half with an even node count); the
// screen relies on that. Pure functions; never throw.
#pragma once

#include <cmath>
#include <cstdint>
#include <optional>
#include <vector>

#include "bounds/count_noise.h"
#include "bounds/gauss_hermite.h"
#include "bounds/predictive.h"

namespace tallyd::bounds {

// Gauss-Hermite is kept while rho = sd(eta*) / (noise sd on the eta scale)
// is at most this: 48 nodes are within 1e-10 relative there (measured
// against the grid rule and Boost.Math's adaptive Gauss-Kronrod; see
// tests/bounds/quadrature_test.cc).
inline constexpr double kHermiteMaxRho = 1.5;
// Grid rule: +-kGridHalfWidth sd(eta*) (Gaussian mass outside ~3.6e-33),
// kGridStepsPerWidth steps per min(sd(eta*), noise width), at most
// kMaxGridNodes nodes (reached only when rho > ~227, e.g. a mean of 2.6e6
// with eta_variance 0.02; the step is then wider than planned and the
// rule's error is no longer negligible: see predictive.h).
inline constexpr double kGridHalfWidth = 12;
inline constexpr double kGridStepsPerWidth = 3;
inline constexpr int kMaxGridNodes = 16384;

struct QuadratureRule {
  bool grid = false;       // trapezoid grid instead of Gauss-Hermite
  int hermite_nodes = 1;   // Gauss-Hermite nodes when !grid
  int grid_nodes = 0;      // grid nodes when grid
  bool grid_capped = false;  // the grid wanted more than kMaxGridNodes nodes
  double rho = 0;          // sd(eta*) over the narrowest relevant noise width
};

// The rule quadrature_bounds uses for these inputs (same preconditions).
// The narrowest relevant noise width is taken at eta_mean -+ z_alpha sd
// (for the log link Poisson, 1/sqrt(mean) there), not at the observed count.
QuadratureRule choose_rule(const Predictor& predictor, const CountNoise& noise, int nodes, double alpha);

// The log link's shortcut for the mixture's E[Y]: with a Gauss-Hermite rule
// whose every node has its mean inside (kMinMean, kMaxMean) (no component
// pooled at zero or capped), sum_i w_i exp(eta_i) is the rule's value of
// E[exp(eta*)] = exp(eta_mean + eta_variance / 2), the lognormal mean, which
// the rule reproduces to rounding (its error for exp(s x) is of order
// s^(2n) / (2^n (2n)!), below 1e-60 for 48 nodes and s < 10). Then
// lognormal_expected() is what build_mixture and the screen report as
// `expected`, with one exp instead of one per node; nullopt otherwise.
std::optional<double> lognormal_expected(const Predictor& predictor, const CountNoise& noise, const QuadratureRule& rule);

// Per-component values; sized to the mixture (up to kMaxGridNodes).
using PerNode = std::vector<double>;

// The mixture sum_i w_i NoiseAt(mu_i); components whose mean is at zero are
// pooled into w0 (mass at count 0). All other components share one kind:
// Poisson, or NB2 with per-component size.
struct Mixture {
  int n = 0;
  double w0 = 0;
  bool poisson = true;
  PerNode w, mu, size, q, inv_mu;
  std::vector<NoiseAt> noise;
  double expected = 0;  // sum_i w_i mu_i, zero components included
};

// d eta / d mu at mu > 0.
double eta_per_mu(glm::Link link, double mu);

// Calls node(weight, eta) for every node of the rule, in ascending eta,
// with the normalised weights the mixture uses. No allocation for the
// Gauss-Hermite rule (the screen walks the nodes without building the
// mixture); the grid rule keeps its weights in one vector.
template <class Node>
void for_each_node(const Predictor& predictor, const QuadratureRule& rule, Node&& node);

// Fills `m` (which must be default-constructed) with the rule's components.
void build_mixture(const Predictor& predictor, const CountNoise& noise, const QuadratureRule& rule, Mixture& m);

// P(Y = k) of the mixture, from the component pmfs at k.
double mass(const Mixture& m, std::int64_t k, const PerNode& pmf);
// Component pmfs at k -> at k + 1 (from k = -1: the pmfs at 0).
void pmf_up(const Mixture& m, std::int64_t k, PerNode& pmf);
// Component pmfs at k -> at k - 1, k >= 1.
void pmf_down(const Mixture& m, std::int64_t k, PerNode& pmf);

struct Probe {
  double cdf;  // P(Y <= k)
  double sf;   // P(Y > k)
};
// The mixture's CDF and survival at k (one Boost.Math tail per component);
// leaves the component pmfs at k in `pmf`.
Probe probe(const Mixture& m, std::int64_t k, PerNode& pmf);

template <class Node>
void for_each_node(const Predictor& predictor, const QuadratureRule& rule, Node&& node) {
  if (predictor.eta_variance == 0) {
    node(1.0, predictor.eta_mean);
    return;
  }
  if (rule.grid) {
    // Trapezoid rule in eta over +-kGridHalfWidth sd. For an integrand
    // that is a Gaussian weight times a function analytic in a strip (the
    // count pmfs and CDFs as functions of eta are), the trapezoid rule
    // converges geometrically in 1/step (the standard result for periodic
    // or rapidly decaying analytic integrands); with kGridStepsPerWidth
    // steps per narrower width the error is far below double rounding.
    const double sd = std::sqrt(predictor.eta_variance);
    const int n = rule.grid_nodes;
    const double step = 2 * kGridHalfWidth * sd / (n - 1);
    std::vector<double> weight(static_cast<std::size_t>(n));
    double total = 0;
    for (int i = 0; i < n; ++i) {
      const double x = -kGridHalfWidth + step / sd * i;  // standardised
      weight[static_cast<std::size_t>(i)] = std::exp(-0.5 * x * x);
      total += weight[static_cast<std::size_t>(i)];
    }
    for (int i = 0; i < n; ++i) {
      node(weight[static_cast<std::size_t>(i)] / total, predictor.eta_mean - kGridHalfWidth * sd + step * i);
    }
    return;
  }
  const HermiteRule& hermite = gauss_hermite(rule.hermite_nodes);
  // Normalised by the computed sum (sqrt(pi) up to rounding), which makes the
  // mixture CDF reach exactly 1 as far as the sums allow.
  const double scale = std::sqrt(2 * predictor.eta_variance);
  for (std::size_t i = 0; i < hermite.nodes.size(); ++i) {
    node(hermite.normalised[i], predictor.eta_mean + scale * hermite.nodes[i]);
  }
}

}  // namespace tallyd::bounds
