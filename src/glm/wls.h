// Weighted least squares for one IRLS step, with detection of aliased
// (linearly dependent or negligible) columns. Internal to glm/.
//
// Method: Householder QR of diag(sqrt_w) X with limited column pivoting, as
// LINPACK's dqrdc2 that R's glm.fit uses: columns are taken in their given
// order, and a column whose part orthogonal to the columns already taken is
// below `alias_tolerance` times its own norm is set aside as aliased. So of
// two collinear columns the later one is dropped (the intercept is never
// given up for a dummy that duplicates it). A column whose whole weighted
// norm is below `alias_tolerance` times the largest column norm (e.g. a
// harmonic that is ~0 on every record seen so far) is aliased too.
//
// Fast path (the same solution up to rounding, cheaper for a tall, narrow
// design): when every column is well determined, the normal equations
// X'WX b = X'Wz are solved by a Cholesky factorisation of the p x p matrix
// instead (about n p^2 / 2 multiply-adds against 2 n p^2 for the QR).
// "Well determined" means: each column's weighted norm is at least
// kNormalOwnRatio of the largest, and the part of it not explained by the
// columns before it (the Cholesky pivot) keeps at least kNormalPivotRatio of
// its squared norm, i.e. at least 1% of its norm. Forming X'WX squares the
// condition number; the pivot bound caps how nearly dependent any column can
// be on the earlier ones, and tests/glm/wls_test.cc checks the two paths
// agree to 1e-11 on a daily seasonal design. No column passing both bounds
// could be aliased by the QR, so the fast path is taken only when
// alias_tolerance <= kNormalOwnRatio (the default is 1e-9). A column failing
// either bound (a trend decades after the series' origin, a harmonic that is
// ~0 on the records seen, collinear covariates) sends the solve to the QR.
//
// The object is a reusable workspace: repeated solves of the same shape do
// not allocate. Not thread-safe (one per fit).
#pragma once

#include <vector>

#include <Eigen/Dense>

namespace tallyd::glm {

class WeightedLeastSquares {
 public:
  // Minimises sum_i sqrt_w(i)^2 (z(i) - X.row(i) b)^2 over b.
  // Preconditions: X.rows() == z.size() == sqrt_w.size(); entries finite.
  // Returns the rank (0 means nothing estimable; coefficients are then 0).
  int solve(const Eigen::MatrixXd& X, const Eigen::VectorXd& z, const Eigen::VectorXd& sqrt_w,
            double alias_tolerance);

  // Results of the last solve. Coefficients has length p, 0 for aliased columns.
  const Eigen::VectorXd& coefficients() const { return beta_; }
  const std::vector<bool>& aliased() const { return aliased_; }
  int rank() const { return rank_; }
  // (X' W X)^{-1} over the non-aliased columns, zero rows/columns for the
  // aliased ones (p x p).
  Eigen::MatrixXd unscaled_covariance() const;
  // Whether the last solve took the normal-equations path (for tests).
  bool used_normal_equations() const { return normal_; }

  // Bounds of the normal-equations path (see above).
  static constexpr double kNormalOwnRatio = 1e-4;    // column norm / largest column norm
  static constexpr double kNormalPivotRatio = 1e-4;  // pivot / squared column norm

 private:
  Eigen::MatrixXd a_;                // weighted design, overwritten by the reflections
  Eigen::VectorXd b_;                // weighted response, overwritten by Q'b
  Eigen::VectorXd norms_;            // weighted column norms before the factorisation
  Eigen::VectorXd work_;             // Householder workspace
  Eigen::MatrixXd r_;                // rank x rank upper triangle of the kept columns
  Eigen::VectorXd beta_;
  std::vector<Eigen::Index> kept_;   // original index of each kept column, in order
  std::vector<bool> aliased_;
  int rank_ = 0;
  bool normal_ = false;

  // The normal-equations path; false (nothing set) when a column fails the
  // bounds and the QR must decide.
  bool solve_normal(const Eigen::MatrixXd& X, const Eigen::VectorXd& z,
                    const Eigen::VectorXd& sqrt_w);
  Eigen::MatrixXd gram_;  // X'WX, then its Cholesky factor L in the lower triangle
};

}  // namespace tallyd::glm
