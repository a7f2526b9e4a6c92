// One Newton step over a moving window, between full refits
// (model.step_between_refits; series/series_model.h).
//
// A full refit leaves the GLM at converged coefficients beta*. When the
// window moves on by a few records, IRLS started from beta* would take a
// first step that needs only the window's sums at beta*. Under the log link,
// with variance function V and prior weights w,
//   A = sum_i w_i mu_i^2 / V(mu_i) x_i x_i'        (X'WX at beta*)
//   g = sum_i w_i (y_i - mu_i) mu_i / V(mu_i) x_i  (the score at beta*)
//   P = sum_i w_i (y_i - mu_i)^2 / V(mu_i)          (Pearson's statistic at beta*)
// with mu_i = exp(x_i' beta* + offset_i). Each record adds one term when it
// joins the window and takes the same term away when it leaves, O(p^2)
// instead of a pass over the window, so the fit can follow every record:
//   beta = beta* + A^-1 g,  (X'WX)^-1 ~ A^-1,  phi ~ P / (n - p).
// This is Fisher scoring's first iteration from beta* (IRLS's, R's glm.fit's),
// on the current window. Its error against the converged fit of the same
// window is second order in how far the window's estimate has moved since
// beta* (Newton's method converges quadratically; for the log link the
// expected and observed information coincide, so scoring is Newton's method
// here); the covariance and Pearson's statistic are taken at beta*, which is
// first order in that distance. A full refit every model.refit_every records
// starts again from a converged beta*; docs/model.md states the trade and
// docs/benchmarks.md the measured alert changes.
//
// Log link only, families Poisson, quasi-Poisson and negative binomial (with
// the size of the last full fit held fixed). Not thread-safe.
#pragma once

#include <cstddef>

#include <Eigen/Dense>

#include "glm/family.h"

namespace tallyd {

// A step stands only while it stays near beta*, where its error is small.
// Once it has moved the coefficients by more than this many standard errors
// of the last full fit (sqrt of distance2 over that fit's dispersion), the
// series takes the sums again at the step's coefficients (reset() and every
// record of the window again, with the weight it entered with: one more
// Fisher scoring iteration on the current window, O(n p^2)) and steps from
// there; it refits fully only if that step too strays, or once Pearson's
// statistic per degree of freedom has grown by more than
// kMaxStepDispersionGrowth since the last full fit (the window no longer
// looks like the data beta* was fitted to). Chosen on the replay benchmark's
// feed (docs/benchmarks.md, "Speed, sixth pass" and "seventh pass").
inline constexpr double kMaxStepDistance = 2.0;
inline constexpr double kMaxStepDispersionGrowth = 1.5;

class WindowStep {
 public:
  // Starts empty sums at `beta_star` (length p) for `family`; `theta` is the
  // negative binomial size (ignored otherwise).
  void reset(const Eigen::VectorXd& beta_star, glm::Family family, double theta);
  // Forgets everything: active() is false until the next reset.
  void clear();
  bool active() const { return active_; }

  // Adds one record's terms (sign +1) or removes them (sign -1). `x` has p
  // elements (the design row without the offset); a record with weight <= 0
  // or a non-finite mean at beta* adds nothing. Precondition: active().
  void account(const double* x, double offset, double y, double weight, double sign);
  // The same, with the record's mean at beta* given (exp(x' beta* + offset),
  // e.g. from the fit that produced beta*) instead of computed.
  void account_mean(const double* x, double mu, double y, double weight, double sign);

  // Records whose terms are in the sums (weight > 0).
  std::size_t rows() const { return rows_; }
  double pearson() const { return pearson_; }
  const Eigen::VectorXd& beta_star() const { return beta_; }

  // The step: beta = beta* + A^-1 g (into `beta`, resized to p), keeping
  // A's Cholesky factor for inverse(). False when A is not positive
  // definite (too few records, an aliased column), leaving `beta` as it was.
  // Called once per record: no allocation once `beta` has p elements.
  bool solve(Eigen::VectorXd& beta);
  // scale * A^-1 into `out`, from the factor of the last solve() that
  // returned true. Precondition: `out` is p x p (a matrix or a map of one,
  // e.g. a model's fit, series/model_fit.h). No allocation.
  void inverse(double scale, Eigen::Ref<Eigen::MatrixXd> out) const;

  // (beta - beta*)' A (beta - beta*): how far `beta` is from beta*, squared,
  // in the metric of the information (standard errors, for a unit dispersion).
  double distance2(const Eigen::VectorXd& beta) const;

 private:
  bool active_ = false;
  glm::Family family_ = glm::Family::poisson;
  double theta_ = 0;  // negbin size; +inf or <= 0: Poisson variance
  Eigen::VectorXd beta_;
  Eigen::MatrixXd information_;  // A, lower triangle kept
  Eigen::VectorXd score_;        // g
  Eigen::MatrixXd factor_;       // L with L L' = A (lower), from the last solve()
  double pearson_ = 0;
  std::size_t rows_ = 0;
};

}  // namespace tallyd
