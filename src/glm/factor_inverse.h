// scale * (L L')^-1 from a lower-triangular Cholesky factor L, for the small
// systems of a series model: the covariance of the refit's fast path
// (glm/small_fit.h) and of the steps between refits (series/window_step.h).
// Header-only; no allocation once `out` is p x p. `out` is an
// Eigen::MatrixXd (resized to p x p) or a reference to or map of a p x p
// matrix (series/model_fit.h), written element by element either way.
#pragma once

#include <Eigen/Dense>

#include "glm/unrolled_size.h"

namespace tallyd::glm {

// `lower(i, j)` reads L at i >= j (its diagonal positive). (L L')^-1 =
// L^-T L^-1: L^-1 goes into out's lower triangle and diagonal, column by
// column; then (L^-T L^-1)(a, b) = sum_{k >= b} Linv(k, a) Linv(k, b) for
// a <= b into the upper triangle and diagonal (it reads Linv at rows
// k >= b >= a, which no write of that loop has touched: the writes are at
// rows a' <= a, above the diagonal except for (a, a), written last and read
// only by its own sum); mirrored at the end.
namespace detail {

// The sums of scaled_inverse_from_factor (below) in the same order, on a
// local copy of L and a local result of P x P, P known at compile time:
// the loops unroll and nothing is read through `out`'s strides. The result
// is written to `out` once, bit for bit what the general loops give.
template <int P, class Lower, class Out>
void scaled_inverse_fixed(const Lower& lower, double scale, Out& out) {
  double l[P][P];
  double w[P][P];  // w[i][c] plays out(i, c)
  #pragma GCC unroll 8
  for (int i = 0; i < P; ++i) {
    #pragma GCC unroll 8
    for (int j = 0; j <= i; ++j) l[i][j] = lower(i, j);
  }
  #pragma GCC unroll 8
  for (int c = 0; c < P; ++c) {
    #pragma GCC unroll 8
    for (int i = c; i < P; ++i) {
      double v = i == c ? 1.0 : 0.0;
      #pragma GCC unroll 8
      for (int k = c; k < i; ++k) v -= l[i][k] * w[k][c];
      w[i][c] = v / l[i][i];
    }
  }
  #pragma GCC unroll 8
  for (int a = 0; a < P; ++a) {
    #pragma GCC unroll 8
    for (int b = P - 1; b >= a; --b) {
      double v = 0;
      #pragma GCC unroll 8
      for (int k = b; k < P; ++k) v += w[k][a] * w[k][b];
      w[a][b] = v * scale;
    }
  }
  #pragma GCC unroll 8
  for (int a = 0; a < P; ++a) {
    #pragma GCC unroll 8
    for (int b = a; b < P; ++b) {
      out(a, b) = w[a][b];
      out(b, a) = w[a][b];
    }
  }
}

// The general loops, for any p (scaled_inverse_from_factor below takes them
// beyond kUnrolledColumns).
template <class Lower, class Out>
void scaled_inverse_loops(const Lower& lower, Eigen::Index p, double scale, Out& out) {
  for (Eigen::Index c = 0; c < p; ++c) {
    for (Eigen::Index i = c; i < p; ++i) {
      double v = i == c ? 1.0 : 0.0;
      for (Eigen::Index k = c; k < i; ++k) v -= lower(i, k) * out(k, c);
      out(i, c) = v / lower(i, i);
    }
  }
  for (Eigen::Index a = 0; a < p; ++a) {
    for (Eigen::Index b = p - 1; b >= a; --b) {
      double v = 0;
      for (Eigen::Index k = b; k < p; ++k) v += out(k, a) * out(k, b);
      out(a, b) = v * scale;
    }
  }
  for (Eigen::Index a = 0; a < p; ++a) {
    for (Eigen::Index b = a + 1; b < p; ++b) out(b, a) = out(a, b);
  }
}

}  // namespace detail

// Up to kUnrolledColumns (a series model's usual size) the loops are
// unrolled on local arrays (detail::scaled_inverse_fixed), with the same
// sums in the same order: bit for bit the general loops' result while the
// compiler fuses no multiply-add on its own (a portable x86-64 build has
// none to use; TALLYD_NATIVE_ARCH sets -ffp-contract=off;
// tests/glm/factor_inverse_test.cc).
template <class Lower, class Out>
void scaled_inverse_from_factor(const Lower& lower, Eigen::Index p, double scale, Out& out) {
  if (out.rows() != p || out.cols() != p) out.resize(p, p);
  with_unrolled_size(p, [&](auto size) {
    constexpr int kSize = decltype(size)::value;
    if constexpr (kSize > 0) detail::scaled_inverse_fixed<kSize>(lower, scale, out);
    else detail::scaled_inverse_loops(lower, p, scale, out);
  });
}

}  // namespace tallyd::glm
