// A warm-started refit of a narrow design (at most 8 columns) in one pass
// over the records per IRLS step: the fast path of a series' refit. Internal
// to the numeric modules; fit.h stays the public contract and the reference.
//
// What it computes: exactly the steps of fit_glm (glm/irls.h) for Poisson and
// quasi-Poisson under the log link from a warm start, with the same
// convergence rule |dev - dev_old| / (|dev| + 0.1) < tolerance, the same
// step-halving and the same choice of solver (glm/wls.h): the normal
// equations when every column passes their bounds, else the Householder QR
// of the weighted design (young windows, where the trend and a long
// season's harmonics are nearly collinear over a few weeks). Each pass
// computes, for one coefficient vector, the linear predictors, the means,
// the deviance and X'WX, X'Wz at those means: if the step is accepted they
// are the next step's system, and at convergence X'WX is the information
// the covariance is taken from (or its QR, when a column fails the
// bounds). The results equal fit_glm's up to rounding (sums taken in
// another order; tests/glm/small_fit_test.cc asks 1e-10 of the largest
// coefficient).
//
// Whenever fit_glm would do anything else (a start giving invalid means,
// a column that the QR aliases, step-halving that stalls, a mean running off
// to 0, no residual degrees of freedom, all counts zero, a record left
// out...) fit() returns
// false and the caller runs fit_glm on the same data: the fast path never
// decides a hard case by itself.
//
// The object is a reusable workspace (no allocation after the first fit of
// a given size). Not thread-safe.
#pragma once

#include <array>

#include <Eigen/Dense>

#include "glm/fit.h"

namespace tallyd::glm {

class SmallFit {
 public:
  static constexpr int kMaxColumns = 8;

  // Whether fit() can apply at all to these options and this many columns
  // (family poisson or quasipoisson, log link, 1 <= p <= kMaxColumns,
  // no null deviance asked, alias_tolerance within the normal-equations
  // bound). When false, fit() always returns false.
  static bool applies(const FitOptions& options, int p);

  // Sets the design the next fits read (takes log y once for all of them).
  // The arrays are the caller's: they must stay alive and unchanged until
  // the last fit() or eta()/mu() that reads them. X.rows() == y.size() ==
  // offset.size().
  void use(const Eigen::MatrixXd& X, const Eigen::VectorXd& y, const Eigen::VectorXd& offset);

  // Fits the design given to use() with prior `weights` (n values) from the
  // coefficients `start` (length p), as fit_glm(X, y, offset, weights,
  // options, &start) would. True: `out` holds the result (status ok).
  // False: nothing usable was found on the fast path; `out` is unspecified
  // and the caller must call fit_glm.
  bool fit(const Eigen::VectorXd& weights, const FitOptions& options, const Eigen::VectorXd& start,
           FitResult& out);

  // Linear predictors (offset included) and means at the coefficients of
  // the last successful fit(), for the n records of the design; valid until
  // the next use() or fit(). estimate_at(b) says whether b is those
  // coefficients bit for bit, so that the caller can read these instead of
  // computing them again.
  bool estimate_at(const Eigen::VectorXd& coefficients) const;
  const Eigen::VectorXd& eta() const { return eta_; }
  const Eigen::VectorXd& mu() const { return mu_; }

 private:
  using Square = std::array<double, kMaxColumns * kMaxColumns>;
  using Column = std::array<double, kMaxColumns>;

  // The sums of one pass at one coefficient vector.
  struct Sums {
    bool valid = false;  // every mean usable (finite eta, mu > 0): irls.cc's test
    bool odd = false;    // a mean outside the range the fast path handles: use fit_glm
    double deviance = 0;
    Square gram{};       // X'WX, upper triangle (row-major, j <= k)
    Column rhs{};        // X'Wz
  };

  // A pass at `beta` writing eta/mu into eta_next_/mu_next_; with `reuse`
  // the linear predictors and means are taken from eta_/mu_ (beta must be
  // the coefficients they belong to).
  void pass(const Column& beta, const Eigen::VectorXd& weights, bool reuse, Sums& s);
  // Cholesky of s.gram under wls.h's bounds into chol_ (lower, row-major);
  // false when a column fails them.
  bool factor(const Sums& s);
  // Solves X'WX b = X'Wz with chol_.
  void solve(const Sums& s, double* beta) const;
  // The QR (as glm/wls.h's) of the weighted design at the last pass's means:
  // its R' into chol_ and, when beta is not null, the least-squares
  // coefficients into beta; false when it would alias a column.
  bool qr(double alias_tolerance, double* beta);
  // The next IRLS coefficients from the sums of an accepted pass (the last
  // pass made): by the normal equations when every column passes their
  // bounds, else by the QR as fit_glm's step; false when the QR aliases a
  // column.
  bool step(const Sums& s, double alias_tolerance, double* beta);
  // (X'WX)^{-1} * dispersion from chol_ (L L' = X'WX).
  void covariance_from_factor(double dispersion, Eigen::MatrixXd& covariance) const;

  const Eigen::MatrixXd* X_ = nullptr;
  const Eigen::VectorXd* y_ = nullptr;
  const Eigen::VectorXd* offset_ = nullptr;
  bool design_ok_ = false;  // finite values, counts >= 0, matching sizes
  Eigen::VectorXd log_y_;
  Eigen::VectorXd eta_, mu_, eta_next_, mu_next_;
  Eigen::VectorXd working_, response_;  // w mu and the working response of a pass
  Square chol_{};
  Eigen::MatrixXd qr_a_;  // young windows: the weighted design, then its reflections
  Eigen::VectorXd qr_b_;  // and the weighted working response, then Q' of it
  bool has_estimate_ = false;
  Column estimate_{};
};

// fit_glm(X, y, offset, weights, options, start, true) through `small` when
// it applies (a warm start, and fit() accepts), else fit_glm itself.
// Precondition: small.use(X, y, offset) was called with these arrays.
FitResult fit_fast_or_general(SmallFit& small, const Eigen::MatrixXd& X, const Eigen::VectorXd& y,
                              const Eigen::VectorXd& offset, const Eigen::VectorXd& weights,
                              const FitOptions& options, const Eigen::VectorXd* start);

}  // namespace tallyd::glm
