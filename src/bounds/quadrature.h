// Internal to bounds: evaluate() by Gauss-Hermite quadrature.
//
// The predictive distribution is the finite mixture sum_i w_i NoiseAt(mu_i)
// with mu_i = g^{-1}(eta_mean + sqrt(2 eta_variance) x_i) over the
// Hermite nodes x_i (one node when eta_variance == 0). Its CDF is evaluated
// two ways: a "probe" at any count k (one Boost.Math tail per component),
// and a step from k to k +/- 1 by the pmf recurrences of Poisson and NB2
// (a multiply-add per component). Each bound is found by probing at a
// starting guess (Cornish-Fisher, blended with a normal on the eta scale),
// bracketing by galloping and probit-scale interpolation, and stepping from
// the tail side towards the centre, so that the tail probability is a
// growing sum of positive terms (no cancellation). A probe whose component
// pmfs underflowed is stepped from only as far as those components provably
// stay negligible. The p-values for the observed count come from continuing
// the nearer step sequence when the count lies between the bounds, otherwise
// from one probe at it. Finally each p-value is kept on the side of alpha
// that the bounds imply, which the true (monotone) CDF guarantees and only
// rounding could break.
//
// The rule over eta*: Gauss-Hermite while the count noise is wide on the eta
// scale next to sd(eta*); a trapezoid grid in eta whose step follows the
// narrower of the two widths otherwise (see choose_rule and predictive.h).
#pragma once

#include <cstdint>
#include <limits>

#include "bounds/mixture.h"
#include "bounds/predictive.h"

namespace tallyd::bounds {
// The rule choice (choose_rule, QuadratureRule and its constants) lives in
// bounds/mixture.h, included here.

// Preconditions (checked by evaluate): eta_mean and eta_variance finite,
// eta_variance >= 0, alpha in [1e-300, 0.5], observed <= 2^53. nodes is
// clamped to [1, kMaxHermiteNodes]; grid_limit and z_alpha as choose_rule's.
// With a bracketing rule (rule.bracket) the lower bound and p_low come from
// bracket_mixtures' low mixture, the upper bound and p_high from its high
// mixture: each an upper bound on the true mixture's tail (predictive.h).
Bounds quadrature_bounds(const Predictor& predictor, const CountNoise& noise, std::int64_t observed,
                         int nodes, double alpha, int grid_limit = kDefaultGridNodeLimit,
                         double z_alpha = std::numeric_limits<double>::quiet_NaN());

}  // namespace tallyd::bounds
