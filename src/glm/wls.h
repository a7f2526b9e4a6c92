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
};

}  // namespace tallyd::glm
