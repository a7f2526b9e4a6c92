#include "series/window_step.h"

#include <algorithm>
#include <cmath>
#include <limits>

#include "glm/factor_inverse.h"
#include "glm/unrolled_size.h"

namespace tallyd {

void WindowStep::reset(const Eigen::VectorXd& beta_star, glm::Family family, double theta) {
  const Eigen::Index p = beta_star.size();
  active_ = true;
  family_ = family;
  theta_ = theta;
  beta_ = beta_star;
  information_.setZero(p, p);
  score_.setZero(p);
  pearson_ = 0;
  rows_ = 0;
}

void WindowStep::clear() {
  active_ = false;
  beta_.resize(0);
  information_.resize(0, 0);
  score_.resize(0);
  factor_.resize(0, 0);
  pearson_ = 0;
  rows_ = 0;
}

namespace {

// The per-record kernels below run after every record. For the usual
// model sizes (p <= glm::kUnrolledColumns, glm/unrolled_size.h) each is
// instantiated with p known at compile time (P), so its loops unroll and
// A's elements sit at constant offsets; P == 0 is the general case. Every
// element is computed by the same operations in the same order either way
// (the same source, instantiated twice), so a size's results do not depend
// on which path it takes;
// tests/series/window_step_test.cc checks both against Eigen's LLT.

// A's lower triangle += working x x', g += s x. `a` is column-major p x p.
template <int P>
void add_terms(double* __restrict a, double* __restrict g, Eigen::Index p_any, const double* __restrict x,
               double working, double s) {
  const Eigen::Index p = P > 0 ? P : p_any;
  #pragma GCC unroll 8
  for (Eigen::Index j = 0; j < p; ++j) {
    const double wx = working * x[j];
    #pragma GCC unroll 8
    for (Eigen::Index k = 0; k <= j; ++k) a[k * p + j] += wx * x[k];
    g[j] += s * x[j];
  }
}

// L with L L' = A (lower triangles, column-major p x p). False when A is
// not (numerically) positive definite.
template <int P>
bool factor(const double* a, double* l, Eigen::Index p_any) {
  const Eigen::Index p = P > 0 ? P : p_any;
  const auto at = [p](Eigen::Index i, Eigen::Index j) { return j * p + i; };
  double largest = 0;
  double smallest = std::numeric_limits<double>::infinity();
  #pragma GCC unroll 8
  for (Eigen::Index j = 0; j < p; ++j) {
    double v = a[at(j, j)];
    #pragma GCC unroll 8
    for (Eigen::Index k = 0; k < j; ++k) v -= l[at(j, k)] * l[at(j, k)];
    if (!(v > 0)) return false;
    const double root = std::sqrt(v);
    l[at(j, j)] = root;
    largest = std::max(largest, root);
    smallest = std::min(smallest, root);
    #pragma GCC unroll 8
    for (Eigen::Index i = j + 1; i < p; ++i) {
      double w = a[at(i, j)];
      #pragma GCC unroll 8
      for (Eigen::Index k = 0; k < j; ++k) w -= l[at(i, k)] * l[at(j, k)];
      l[at(i, j)] = w / root;
    }
  }
  // Positive definite in floating point can still be near-singular (an
  // aliased column); refuse a factor whose diagonal collapsed.
  return smallest > 1e-7 * largest;
}

// L L' d = g into `d`, from L's lower triangle (column-major p x p).
template <int P>
void solve_factored(const double* l, const double* g, double* d, Eigen::Index p_any) {
  const Eigen::Index p = P > 0 ? P : p_any;
  const auto at = [p](Eigen::Index i, Eigen::Index j) { return j * p + i; };
  #pragma GCC unroll 8
  for (Eigen::Index i = 0; i < p; ++i) {  // L z = g
    double v = g[i];
    #pragma GCC unroll 8
    for (Eigen::Index k = 0; k < i; ++k) v -= l[at(i, k)] * d[k];
    d[i] = v / l[at(i, i)];
  }
  #pragma GCC unroll 8
  for (Eigen::Index i = p - 1; i >= 0; --i) {  // L' d = z
    double v = d[i];
    #pragma GCC unroll 8
    for (Eigen::Index k = i + 1; k < p; ++k) v -= l[at(k, i)] * d[k];
    d[i] = v / l[at(i, i)];
  }
}

}  // namespace

void WindowStep::account(const double* x, double offset, double y, double weight, double sign) {
  if (!(weight > 0)) return;
  const Eigen::Index p = beta_.size();
  double eta = offset;
  for (Eigen::Index j = 0; j < p; ++j) eta += x[j] * beta_(j);
  account_mean(x, std::exp(eta), y, weight, sign);
}

void WindowStep::account_mean(const double* x, double mu, double y, double weight, double sign) {
  if (!(weight > 0)) return;
  if (!(mu > 0) || !std::isfinite(mu)) return;
  // V(mu): mu, or mu + mu^2 / theta for NB2 (Poisson when theta is not a
  // positive finite number). Under the log link d mu / d eta = mu.
  const bool nb = family_ == glm::Family::negbin && std::isfinite(theta_) && theta_ > 0;
  const double variance = nb ? mu + mu * mu / theta_ : mu;
  const double working = sign * weight * mu * mu / variance;
  const double residual = y - mu;
  const double s = sign * weight * residual * mu / variance;
  glm::with_unrolled_size(beta_.size(), [&](auto size) {
    add_terms<decltype(size)::value>(information_.data(), score_.data(), beta_.size(), x, working, s);
  });
  pearson_ += sign * weight * residual * residual / variance;
  if (sign > 0) ++rows_;
  else if (rows_ > 0) --rows_;
}

bool WindowStep::solve(Eigen::VectorXd& beta) {
  const Eigen::Index p = beta_.size();
  if (!active_ || rows_ < static_cast<std::size_t>(p)) return false;
  // Cholesky of A (lower triangle), by columns, as Eigen's unblocked LLT
  // would for these small sizes but without its allocations; then
  // beta* + A^-1 g by two triangular solves.
  if (factor_.rows() != p || factor_.cols() != p) factor_.resize(p, p);
  bool ok = false;
  glm::with_unrolled_size(p, [&](auto size) {
    ok = factor<decltype(size)::value>(information_.data(), factor_.data(), p);
  });
  if (!ok) return false;  // `beta` as it was
  if (beta.size() != p) beta.resize(p);
  glm::with_unrolled_size(p, [&](auto size) {
    solve_factored<decltype(size)::value>(factor_.data(), score_.data(), beta.data(), p);
  });
  beta += beta_;
  return true;
}

void WindowStep::inverse(double scale, Eigen::Ref<Eigen::MatrixXd> out) const {
  glm::scaled_inverse_from_factor([this](Eigen::Index i, Eigen::Index j) { return factor_(i, j); }, factor_.rows(),
                                  scale, out);
}

double WindowStep::distance2(const Eigen::VectorXd& beta) const {
  const Eigen::Index p = beta_.size();
  // d' A d from A's lower triangle: the diagonal once, the rest twice.
  double sum = 0;
  for (Eigen::Index j = 0; j < p; ++j) {
    const double dj = beta(j) - beta_(j);
    double off = 0;
    for (Eigen::Index k = 0; k < j; ++k) off += information_(j, k) * (beta(k) - beta_(k));
    sum += dj * (information_(j, j) * dj + 2 * off);
  }
  return sum;
}

}  // namespace tallyd
