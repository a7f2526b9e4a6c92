#include "glm/wls.h"

#include <cmath>

#include <Eigen/Householder>

namespace tallyd::glm {

bool WeightedLeastSquares::solve_normal(const Eigen::MatrixXd& X, const Eigen::VectorXd& z,
                                        const Eigen::VectorXd& sqrt_w) {
  const Eigen::Index n = X.rows();
  const Eigen::Index p = X.cols();
  if (n < p || p == 0) return false;
  a_.noalias() = sqrt_w.asDiagonal() * X;
  b_ = sqrt_w.cwiseProduct(z);
  // The lower triangle of X'WX, one contiguous dot product per entry: for a
  // handful of columns this beats a general rank update, which packs the
  // matrix into blocks first.
  gram_.resize(p, p);
  for (Eigen::Index j = 0; j < p; ++j) {
    for (Eigen::Index i = j; i < p; ++i) gram_(i, j) = a_.col(i).dot(a_.col(j));
  }
  const double largest = gram_.diagonal().maxCoeff();
  const double own_ratio2 = kNormalOwnRatio * kNormalOwnRatio;
  if (!(largest > 0) || !std::isfinite(largest)) return false;
  // Cholesky in column order, checking each pivot against its column's own
  // squared norm (the diagonal of X'WX) before it is used.
  for (Eigen::Index j = 0; j < p; ++j) {
    const double own = gram_(j, j);
    if (!(own > own_ratio2 * largest)) return false;
    double pivot = own;
    for (Eigen::Index k = 0; k < j; ++k) pivot -= gram_(j, k) * gram_(j, k);
    if (!(pivot > kNormalPivotRatio * own)) return false;
    const double l = std::sqrt(pivot);
    gram_(j, j) = l;
    for (Eigen::Index i = j + 1; i < p; ++i) {
      double v = gram_(i, j);
      for (Eigen::Index k = 0; k < j; ++k) v -= gram_(i, k) * gram_(j, k);
      gram_(i, j) = v / l;
    }
  }
  // R = L' is the triangle the QR would give (up to the signs of its rows),
  // so unscaled_covariance() serves both paths.
  r_ = gram_.transpose().triangularView<Eigen::Upper>();
  beta_.noalias() = a_.transpose() * b_;
  gram_.triangularView<Eigen::Lower>().solveInPlace(beta_);
  r_.triangularView<Eigen::Upper>().solveInPlace(beta_);
  kept_.resize(static_cast<std::size_t>(p));
  for (Eigen::Index j = 0; j < p; ++j) kept_[static_cast<std::size_t>(j)] = j;
  aliased_.assign(static_cast<std::size_t>(p), false);
  rank_ = static_cast<int>(p);
  return true;
}

int WeightedLeastSquares::solve(const Eigen::MatrixXd& X, const Eigen::VectorXd& z,
                                const Eigen::VectorXd& sqrt_w, double alias_tolerance) {
  const Eigen::Index n = X.rows();
  const Eigen::Index p = X.cols();
  // With alias_tolerance at most kNormalOwnRatio (1e-4; the default is 1e-9)
  // the fast path's bounds are stricter than the QR's, so where it applies
  // the QR would keep every column too.
  normal_ = alias_tolerance <= kNormalOwnRatio && solve_normal(X, z, sqrt_w);
  if (normal_) return rank_;
  a_.noalias() = sqrt_w.asDiagonal() * X;
  b_ = sqrt_w.cwiseProduct(z);
  norms_ = a_.colwise().norm().transpose();
  work_.resize(p + 1);
  kept_.clear();
  aliased_.assign(static_cast<std::size_t>(p), false);
  const double largest = p > 0 ? norms_.maxCoeff() : 0.0;

  Eigen::Index k = 0;  // reflections applied so far = rank so far
  for (Eigen::Index j = 0; j < p; ++j) {
    const double own = norms_(j);
    if (k >= n || !(own > alias_tolerance * largest)) {
      aliased_[static_cast<std::size_t>(j)] = true;
      continue;
    }
    const double rest = a_.col(j).segment(k, n - k).norm();
    if (!(rest > alias_tolerance * own)) {
      aliased_[static_cast<std::size_t>(j)] = true;
      continue;
    }
    double tau = 0;
    double beta = 0;
    a_.col(j).segment(k, n - k).makeHouseholderInPlace(tau, beta);
    a_(k, j) = beta;
    if (k + 1 < n) {
      // The reflector's essential part lives below the diagonal of column j;
      // it only touches columns to its right, so no copy is needed.
      if (j + 1 < p) {
        a_.block(k, j + 1, n - k, p - j - 1)
            .applyHouseholderOnTheLeft(a_.col(j).segment(k + 1, n - k - 1), tau, work_.data());
      }
      b_.segment(k, n - k)
          .applyHouseholderOnTheLeft(a_.col(j).segment(k + 1, n - k - 1), tau, work_.data());
    }
    kept_.push_back(j);
    ++k;
  }
  rank_ = static_cast<int>(k);

  r_.resize(k, k);
  r_.setZero();
  for (Eigen::Index c = 0; c < k; ++c) r_.col(c).head(c + 1) = a_.col(kept_[c]).head(c + 1);

  beta_ = Eigen::VectorXd::Zero(p);
  if (k > 0) {
    const Eigen::VectorXd kept_beta = r_.triangularView<Eigen::Upper>().solve(b_.head(k));
    for (Eigen::Index c = 0; c < k; ++c) beta_(kept_[c]) = kept_beta(c);
  }
  return rank_;
}

Eigen::MatrixXd WeightedLeastSquares::unscaled_covariance() const {
  const Eigen::Index p = beta_.size();
  const Eigen::Index k = rank_;
  Eigen::MatrixXd cov = Eigen::MatrixXd::Zero(p, p);
  if (k == 0) return cov;
  // (X'WX)^{-1} = (R'R)^{-1} = R^{-1} R^{-T}
  const Eigen::MatrixXd r_inv =
      r_.triangularView<Eigen::Upper>().solve(Eigen::MatrixXd::Identity(k, k));
  const Eigen::MatrixXd kept_cov = r_inv * r_inv.transpose();
  for (Eigen::Index c = 0; c < k; ++c) {
    for (Eigen::Index d = 0; d < k; ++d) cov(kept_[c], kept_[d]) = kept_cov(c, d);
  }
  return cov;
}

}  // namespace tallyd::glm
