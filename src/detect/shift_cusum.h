// The sustained-shift CUSUM: log-likelihood ratio increments for a rate
// change by a factor, and its decision limit from a target in-control
// average run length (ARL0).
//
// For a count y with in-control mean mu, the increment is
//   log f(y; factor * mu) - log f(y; mu),
// f Poisson (Lucas 1985: the same CUSUM as his integer form scaled by
// log(factor)) or NB2 with a fixed size r (the overdispersed analogue):
//   Poisson: y log(factor) - mu (factor - 1)
//   NB2:     y log(factor (r + mu) / (r + factor mu)) + r log((r + mu) / (r + factor mu)).
// The statistic is S = max(0, S + increment); an alarm when S > h.
//
// h comes from the Markov-chain approximation of Brook and Evans (1972): the
// interval [0, h] is cut into `states` cells, the in-control transition
// probabilities between cells come from the exact count distribution, and
// the ARL from state 0 is the solution of (I - R) L = 1. h is then found by
// bisection on log ARL. The chain assumes a constant in-control mean; see
// docs/detection.md for how a varying mean is handled. For a fitted model
// the limit also allows for the error of the fitted mean (InControl below).
// Pure functions and one value cache; never throw on data.
#pragma once

#include <cstdint>
#include <map>
#include <tuple>

#include "detect/detect_spec.h"

namespace tallyd::detect {

// The in-control count noise at one mean: Poisson when size is not a finite
// positive number, else NB2 with Var = mean + mean^2 / size.
struct CountLaw {
  double mean = 1;
  double size = 0;
  bool poisson() const;
};

// Log-likelihood ratio of count y for mean factor * law.mean against law.mean,
// size held fixed. factor > 0.
double shift_increment(std::int64_t y, const CountLaw& law, double factor);

// What a fitted model says the in-control counts do, for calibrating a limit.
// The counts follow the count noise around a true mean mean * exp(delta -
// eta_variance / 2), with delta ~ N(0, eta_variance) the error of the fitted
// log mean (log link). ShiftError says how delta behaves over a run:
// fresh: drawn anew for every record, so each count follows the predictive
//   mixture over delta (the one-step prediction errors of a model refitted
//   every record are close to independent, like recursive residuals: the
//   error persists, but the refits learn the counts that it would push up);
// held: drawn once and held fixed over a run; the realised alarm rate is
//   then the average over delta of 1 / ARL(delta).
struct InControl {
  double mean = 1;          // predictive mean E[Y] (the model's `expected`), > 0
  double theta = 0;         // NB2 size of the count noise; not finite and positive: no NB2 noise
  double phi = 1;           // quasi-Poisson dispersion (Var / mean of the noise); <= 1: none
  double eta_variance = 0;  // variance of the fitted log mean's error, >= 0 (0: plug-in mean is exact)
  // Residual degrees of freedom of the estimated quasi-Poisson phi (0: phi
  // taken as known). With ShiftError::fresh and phi > 1 the limit also
  // allows for phi's estimation error: the true phi is phi * df / chi2(df),
  // held over a run (consecutive fits share their data), taken as lognormal
  // with the same log-scale spread sqrt(2 / df) and mean 1 + 2 / df,
  // 3-node Gauss-Hermite; the alarm rate is averaged over it.
  double dispersion_df = 0;
};

// The law the CUSUM scores counts against: NB2 (or Poisson) with the
// predictive mean and the predictive variance (noise variance plus
// mean^2 (exp(eta_variance) - 1)).
CountLaw scored_law(const InControl& in);

// In-control ARL (in records) of the one-sided CUSUM with limit h > 0, by the
// Brook-Evans chain with `states` cells (>= 10). Returns +inf when the chain
// cannot reach the limit (e.g. the increment is never positive).
// With a CountLaw the counts follow that same law (a known in-control law).
double chain_arl(const CountLaw& law, double factor, double h, int states = 150);

// With an InControl the increments are scored against scored_law(in) and
// the counts follow the noise around the shifted mean, delta at the 5 nodes
// of the Gauss-Hermite rule: fresh mixes the 5 laws into each record's count
// law; held gives the reciprocal of the alarm rate averaged over delta.
// +inf when the limit cannot be reached.
double chain_arl(const InControl& in, double factor, double h, int states = 150,
                 ShiftError error = ShiftError::held);

// The limit h whose chain ARL is nearest arl0 (> 1) on the log scale: the ARL
// of counts is a step function of h, and of the two limits either side of the
// step that crosses arl0 the nearer is kept (bisection to 1e-3 relative in h).
double decision_limit(const CountLaw& law, double factor, double arl0, int states = 150);
double decision_limit(const InControl& in, double factor, double arl0, int states = 150,
                      ShiftError error = ShiftError::held);

// Decision limits cached by value. The mean and the noise's dispersion index
// at the mean (Var / mean) are rounded to a grid of 0.1 steps on the log
// scale (about 10%), eta_variance to steps of 0.5 in log (below 1e-5 it
// counts as 0), dispersion_df to steps of 0.5 in log (below 2 it counts as
// 2; above 2000 as known), and the limit is computed for the rounded law with a
// 100-cell chain (a limit costs some 100 chain solves), so equal inputs always give
// equal limits, whatever came before (no hidden dependence on history; the
// cache is a speed-up only and needs no checkpoint). Not thread-safe.
class LimitTable {
 public:
  double limit(const InControl& in, double factor, double arl0, ShiftError error = ShiftError::held);
  // A known law: the limit of the InControl with that noise and no estimation error.
  double limit(const CountLaw& law, double factor, double arl0);
  // The rounded situation a limit is computed for.
  static InControl rounded(const InControl& in);
  std::size_t size() const { return cache_.size(); }

 private:
  // mean cell, noise kind (0 Poisson, 1 NB2 size, 2 quasi-Poisson), index cell, eta_variance cell, factor,
  // arl0, error allowance, dispersion_df cell
  std::map<std::tuple<long, int, long, long, double, double, int, long>, double> cache_;
};

}  // namespace tallyd::detect
