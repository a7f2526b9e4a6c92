// scale * (L L')^-1 from a lower-triangular Cholesky factor L, for the small
// systems of a series model: the covariance of the refit's fast path
// (glm/small_fit.h) and of the steps between refits (series/window_step.h).
// Header-only; no allocation once `out` is p x p. `out` is an
// Eigen::MatrixXd (resized to p x p) or a reference to or map of a p x p
// matrix (series/model_fit.h), written element by element either way.
#pragma once

#include <Eigen/Dense>

namespace tallyd::glm {

// `lower(i, j)` reads L at i >= j (its diagonal positive). (L L')^-1 =
// L^-T L^-1: L^-1 goes into out's lower triangle and diagonal, column by
// column; then (L^-T L^-1)(a, b) = sum_{k >= b} Linv(k, a) Linv(k, b) for
// a <= b into the upper triangle and diagonal (it reads Linv at rows
// k >= b >= a, which no write of that loop has touched: the writes are at
// rows a' <= a, above the diagonal except for (a, a), written last and read
// only by its own sum); mirrored at the end.
template <class Lower, class Out>
void scaled_inverse_from_factor(const Lower& lower, Eigen::Index p, double scale, Out& out) {
  if (out.rows() != p || out.cols() != p) out.resize(p, p);
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

}  // namespace tallyd::glm
