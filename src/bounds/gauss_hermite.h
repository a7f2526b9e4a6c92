// Gauss-Hermite quadrature rules for the weight exp(-x^2) on the real line:
//   integral f(x) exp(-x^2) dx  ~  sum_i weights[i] * f(nodes[i]),
// exact for polynomials f of degree <= 2n - 1. For an expectation over
// Z ~ N(0, 1) use x_i * sqrt(2) and weights / sqrt(pi).
#pragma once

#include <vector>

namespace tallyd::bounds {

struct HermiteRule {
  std::vector<double> nodes;    // ascending, symmetric about 0
  std::vector<double> weights;  // positive, sum sqrt(pi); full relative accuracy even when tiny
  // weights[i] / (their sum as computed, in index order): the weights of an
  // expectation, summing to 1 up to rounding. Kept so a caller per record
  // (bounds/mixture.h) neither re-sums nor divides.
  std::vector<double> normalised;
};

inline constexpr int kMaxHermiteNodes = 256;

// The n-node rule, 1 <= n <= kMaxHermiteNodes (n is clamped into that
// range). Built once per n on first use (Golub-Welsch eigenvalues polished
// by Newton steps on the orthonormal Hermite recurrence; weights from the
// derivative formula, which keeps the tiny outer weights accurate where
// Golub-Welsch's squared eigenvector components would not be), then kept
// for the life of the process. Thread-safe; the reference stays valid.
const HermiteRule& gauss_hermite(int n);

}  // namespace tallyd::bounds
