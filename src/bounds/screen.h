// Internal to bounds: a cheap test that settles "no alert" for a record
// before the full bound search (quadrature) or the draws (simulate).
//
// Stage 0 uses no special function: the same weights W_up and W_low (below)
// times floors on the tails at mu_c from a run of pmf terms and Cantelli's
// inequality (tail_floor.h), each provably below the exact tail with its
// rounding charged. It settles most records near their mean; a record it
// leaves goes on to stage 1 exactly as if stage 0 had not run. It settles a
// record only when both floors also exceed the caller's `wanted` level
// (Options::wanted_floor): the engine reads a settled record's floors to
// decide whether to refit on doubt, and floors cheaper but lower than
// stage 1's would otherwise refit more often.
//
// Most records sit near their expected count. For them one Boost.Math tail
// at the central mean mu_c = g^{-1}(eta_mean) gives lower bounds on both
// p-values of the quadrature mixture (mixture.h):
//   P(Y >= y) >= W_up  * P(Y >= y | mu_c),  W_up  = weight of components with mu_i >= mu_c,
//   P(Y <= y) >= W_low * P(Y <= y | mu_c),  W_low = weight of components with mu_i <= mu_c,
// because every count noise tallyd uses is stochastically increasing in its
// mean (Poisson; NB2 at fixed size; quasi-Poisson's NB2 with size
// mu / (phi - 1) has a fixed success probability 1 / phi and a size growing
// with mu), and the link is non-decreasing. The rules are symmetric about
// eta_mean, so W_up and W_low are at least about 1/2 (1 with one node).
// The same inequalities hold for the true mixture with weight 1/2 each.
//
// The weights are summed by walking the rule's nodes (mixture.h,
// for_each_node) without building the mixture: no allocation, one exp per
// node (none under the log link when no node's mean is clamped: a node's
// side is read from its eta, and `expected` is mixture.h's
// lognormal_expected), one tail. Under the log link a Gauss-Hermite node's
// side and band depend only on the node, so there the sums are the rule's
// own, taken once per node count, and a record does no walk at all (while
// rounding provably cannot move a node across an edge; screen.cc). Stage 2, for a record stage 1 leaves
// unsettled: each side's components are split into kScreenBands bands at 1
// and 2 sd(eta*) from eta_mean, and each band's weight multiplies the tail at
// its innermost node (whose mean is the band's nearest to mu_c), so
//   P(Y >= y) >= sum_b W_b * P(Y >= y | mu_b)  (likewise below),
// by the same monotonicity; at most two more tails per side. Records in a
// tail of a wide predictive distribution, which stage 1 sends to the full
// search at about twice alpha, mostly settle here.
//
// Quadrature: when both floors exceed alpha by the margin kScreenMargin
// (which covers the ~1e-12 relative error of the Boost.Math tails and of
// the search's sums), the full search would find the observed count within
// the bounds: the screen never changes an alert (error bound zero).
//
// Simulate: stage 2 uses the true mixture's Gaussian band probabilities
// (P(0 <= Z < 1), P(1 <= Z < 2), P(Z >= 2) for eta* standardised) and the
// tails at the band edges eta_mean +- {0, 1, 2} sd(eta*), not the rule's
// nodes. The draws' p-value is a binomial fraction K-draws estimate of
// the true mixture's p >= floor. When floor > alpha, P(estimate <= alpha)
// <= exp(-K KL(alpha || floor)) (Chernoff-Hoeffding; Hoeffding 1963). The
// screen settles a side only when that bound is at most
// kSimulateScreenRisk (1e-12), so it changes a record's verdict with
// probability at most 2e-12, taking the generator as ideal.
#pragma once

#include <cstdint>
#include <limits>

#include "bounds/predictive.h"

namespace tallyd::bounds {

// Relative margin of the quadrature screen over alpha.
inline constexpr double kScreenMargin = 1e-6;
// Largest probability, per side and record, that a simulate record the
// screen settles would have been flagged by its draws.
inline constexpr double kSimulateScreenRisk = 1e-12;
// Bands per side in stage 2 (the centre band and two outer ones).
inline constexpr int kScreenBands = 3;
// Simulate: stage 0 aims its floors at this multiple of alpha (the Chernoff
// test of 10,000 draws at alpha 1e-3 passes from about 4 alpha).
inline constexpr double kSimulateAim = 20;

struct ScreenOutcome {
  bool settled = false;   // no alert on either side: the full evaluation is not needed
  double expected = 0;    // the quadrature mixture's E[Y] (what quadrature_bounds reports)
  double p_high_floor = 0;  // lower bound on P(Y >= observed) (simulate: of the true mixture after stage 2)
  double p_low_floor = 0;   // lower bound on P(Y <= observed)
  int stage = -1;           // the last stage tried (0, 1 or 2); -1 when none was
};

// Preconditions as quadrature_bounds (evaluate checks them). `draws` is 0
// for quadrature, the number of draws for simulate. `wanted`: stage 0
// settles a record only when both floors exceed it (0: alpha alone).
// grid_limit and z_alpha as choose_rule's (mixture.h). Under a bracketing
// rule the quadrature floors are the true mixture's (weight 1/2 each side,
// stage 2 on the Gaussian bands as for simulate), which lie below the
// bracketing mixtures' tails that the full search reports.
ScreenOutcome screen_record(const Predictor& predictor, const CountNoise& noise, std::int64_t observed,
                            int nodes, double alpha, int draws, double wanted = 0,
                            int grid_limit = kDefaultGridNodeLimit,
                            double z_alpha = std::numeric_limits<double>::quiet_NaN());

// exp(-K KL(alpha || p)) for p > alpha: the Chernoff bound on a binomial
// fraction of K trials with success probability p falling to alpha or below.
// 1 when p <= alpha.
double binomial_low_tail_bound(double alpha, double p, int draws);

}  // namespace tallyd::bounds
