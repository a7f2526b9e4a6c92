#include "bounds/gauss_hermite.h"

#include <algorithm>
#include <array>
#include <cmath>
#include <mutex>

#include <Eigen/Eigenvalues>

namespace tallyd::bounds {
namespace {

struct Evaluation {
  double p_n;         // orthonormal Hermite polynomial of degree n at x
  double derivative;  // d p_n / dx = sqrt(2n) p_{n-1}
};

// Orthonormal Hermite polynomials for the weight exp(-x^2):
// p_0 = pi^(-1/4), p_{j+1} = x sqrt(2/(j+1)) p_j - sqrt(j/(j+1)) p_{j-1}.
// Normalised, so they neither overflow nor underflow where the raw H_n would.
Evaluation evaluate_hermite(int n, double x) {
  constexpr double kPiToMinusQuarter = 0.75112554446494248286;
  double p_prev = 0;
  double p = kPiToMinusQuarter;
  for (int j = 0; j < n; ++j) {
    const double p_next = x * std::sqrt(2.0 / (j + 1)) * p - std::sqrt(static_cast<double>(j) / (j + 1)) * p_prev;
    p_prev = p;
    p = p_next;
  }
  return {p, std::sqrt(2.0 * n) * p_prev};
}

HermiteRule build_rule(int n) {
  // Golub-Welsch: the nodes are the eigenvalues of the Jacobi matrix with
  // zero diagonal and off-diagonal sqrt(j / 2), j = 1..n-1.
  Eigen::VectorXd diagonal = Eigen::VectorXd::Zero(n);
  Eigen::VectorXd off_diagonal(std::max(n - 1, 0));
  for (int j = 1; j < n; ++j) off_diagonal(j - 1) = std::sqrt(j / 2.0);
  Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> solver;
  solver.computeFromTridiagonal(diagonal, off_diagonal, Eigen::EigenvaluesOnly);
  const Eigen::VectorXd eigenvalues = solver.eigenvalues();

  HermiteRule rule;
  rule.nodes.resize(static_cast<std::size_t>(n));
  rule.weights.resize(static_cast<std::size_t>(n));
  for (int i = 0; i < n; ++i) {
    double x = eigenvalues(i);
    Evaluation e = evaluate_hermite(n, x);
    // The eigenvalues are accurate to ~eps * ||J||; a few Newton steps bring
    // each node to full relative accuracy before the weight is taken.
    for (int iteration = 0; iteration < 5; ++iteration) {
      const double step = e.p_n / e.derivative;
      x -= step;
      e = evaluate_hermite(n, x);
      if (std::fabs(step) <= 1e-16 * std::max(1.0, std::fabs(x))) break;
    }
    rule.nodes[static_cast<std::size_t>(i)] = x;
    rule.weights[static_cast<std::size_t>(i)] = 2 / (e.derivative * e.derivative);
  }
  // Exact symmetry, so the rule integrates odd functions to exactly zero.
  for (int i = 0; i < n / 2; ++i) {
    const std::size_t lo = static_cast<std::size_t>(i);
    const std::size_t hi = static_cast<std::size_t>(n - 1 - i);
    const double x = 0.5 * (rule.nodes[hi] - rule.nodes[lo]);
    const double w = 0.5 * (rule.weights[hi] + rule.weights[lo]);
    rule.nodes[lo] = -x;
    rule.nodes[hi] = x;
    rule.weights[lo] = rule.weights[hi] = w;
  }
  if (n % 2 == 1) rule.nodes[static_cast<std::size_t>(n / 2)] = 0;
  double total = 0;
  for (const double w : rule.weights) total += w;
  for (const double w : rule.weights) rule.normalised.push_back(w / total);
  return rule;
}

}  // namespace

const HermiteRule& gauss_hermite(int n) {
  n = std::clamp(n, 1, kMaxHermiteNodes);
  // One slot per n, each filled exactly once; the only shared state, and
  // immutable once built.
  static std::array<std::once_flag, kMaxHermiteNodes + 1> built;
  static std::array<HermiteRule, kMaxHermiteNodes + 1> rules;
  const std::size_t slot = static_cast<std::size_t>(n);
  std::call_once(built[slot], [&] { rules[slot] = build_rule(n); });
  return rules[slot];
}

}  // namespace tallyd::bounds
