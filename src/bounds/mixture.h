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
#include <limits>
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
// The bracketing grid (Options::grid_node_limit): when the grid would want
// more nodes than the limit, it takes exactly the limit (at least
// kMinGridNodeLimit), over +-H sd(eta*) with P(|Z| > H) = 2 kBracketDropped
// alpha, and bracket_mixtures() gives it the weights that bound the
// mixture's tails from above.
inline constexpr int kMinGridNodeLimit = 64;
inline constexpr double kBracketDropped = 1e-16;

struct QuadratureRule {
  bool grid = false;       // trapezoid grid instead of Gauss-Hermite
  int hermite_nodes = 1;   // Gauss-Hermite nodes when !grid
  int grid_nodes = 0;      // grid nodes when grid
  bool grid_capped = false;  // the grid wanted more nodes than it has
  bool bracket = false;    // a capped grid judged by bracket_mixtures (Options::grid_node_limit)
  double half_width = kGridHalfWidth;  // grid: nodes over eta_mean +- half_width sd(eta*)
  double rho = 0;          // sd(eta*) over the narrowest relevant noise width
};

// The rule quadrature_bounds uses for these inputs (same preconditions).
// The narrowest relevant noise width is taken at eta_mean -+ z_alpha sd
// (for the log link Poisson, 1/sqrt(mean) there), not at the observed count.
// grid_limit as Options::grid_node_limit (0: no bracketing, the grid is cut
// at kMaxGridNodes as before; otherwise clamped to
// [kMinGridNodeLimit, kMaxGridNodes]). z_alpha: P(Z > z_alpha) = alpha,
// or NaN to have it computed here (predictive.h, upper_quantile).
QuadratureRule choose_rule(const Predictor& predictor, const CountNoise& noise, int nodes, double alpha,
                           int grid_limit = kDefaultGridNodeLimit,
                           double z_alpha = std::numeric_limits<double>::quiet_NaN());

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

// For a bracketing rule (rule.bracket), from the grid's mixture `m` (built
// by build_mixture with the same rule): two mixtures over the same nodes
// z_0 < ... < z_{N-1} (standardised, spacing D), each node's weight
// replaced by the exact Gaussian mass of a neighbouring bin of eta*:
//   high: node j gets P(z_{j-1} < Z <= z_j) (node 0 all of Z <= z_0),
//   low:  node j gets P(z_j <= Z < z_{j+1}) (node N-1 all of Z >= z_{N-1}),
//         and Z < z_0 goes to the mass at count 0.
// Every count noise here is stochastically increasing in eta (screen.h), so
// moving each bin's mass to its upper edge can only raise P(Y >= k) and to
// its lower edge only raise P(Y <= k): the high mixture's upper tails and
// the low mixture's lower tails are upper bounds on the true mixture's
// (eta* exactly Gaussian), apart from the mass above z_{N-1}, which the
// high mixture drops (at most kBracketDropped * alpha). Summing by parts,
// with s_j the count tail at node j and P_j the bin masses,
//   S_high - S_true <= S_high - S_low <= c S_high + e,  c = H D + D^2 / 2,
// (P_{j-1} - P_j <= P_{j-1} (z_j D + D^2 / 2) for a Gaussian), e a few
// times kBracketDropped * alpha; the same below. Components whose mean is
// clamped at kMaxMean are one distribution and are pooled into one (exact).
// `expected` is m's.
void bracket_mixtures(const QuadratureRule& rule, const Mixture& m, Mixture& low, Mixture& high);

// The relative excess c / (1 - c) of a bracketing rule's tails over the
// true mixture's (see bracket_mixtures; +inf when c >= 1).
double bracket_excess(const QuadratureRule& rule);

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
    const double half = rule.half_width;
    const double step = 2 * half * sd / (n - 1);
    // exp(-x_i^2 / 2) at the standardised nodes x_i = -half + d i, by the
    // ratio of neighbours, exp(-x_i d - d^2 / 2), which itself changes by
    // the factor exp(-d^2) per node: three exp per record instead of one
    // per node, no buffer. Each step adds a rounding, so the weights carry
    // a relative error below ~2n ulp (4e-12 at the largest grid), far
    // below the rule's own accuracy (predictive.h). Both passes run the
    // same recurrence, so the weights they see are the same bits.
    const double d = step / sd;
    const double start = std::exp(-0.5 * half * half);
    const double first_ratio = std::exp(half * d - 0.5 * d * d);
    const double ratio_factor = std::exp(-d * d);
    const auto for_each_weight = [&](auto&& use) {
      double w = start;
      double r = first_ratio;
      for (int i = 0; i < n; ++i) {
        use(i, w);
        w *= r;
        r *= ratio_factor;
      }
    };
    double total = 0;
    for_each_weight([&](int, double w) { total += w; });
    for_each_weight([&](int i, double w) { node(w / total, predictor.eta_mean - half * sd + step * i); });
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
