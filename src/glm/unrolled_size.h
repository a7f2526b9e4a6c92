// Dispatch on a model's coefficient count for kernels unrolled at compile
// time: the series' per-record step (series/window_step.cc) and the
// covariance from a Cholesky factor (glm/factor_inverse.h). Header-only.
#pragma once

#include <type_traits>

#include <Eigen/Core>

namespace tallyd::glm {

// The largest coefficient count with a kernel of its own; a series model
// usually has 3-8 (intercept, trend, a few harmonic pairs, covariates).
inline constexpr int kUnrolledColumns = 8;

// Calls kernel(std::integral_constant<int, P>{}) with P = p when
// 1 <= p <= kUnrolledColumns, and with P = 0 (the general case, p known only
// at run time) otherwise.
template <class Kernel>
void with_unrolled_size(Eigen::Index p, Kernel&& kernel) {
  switch (p) {
    case 1: kernel(std::integral_constant<int, 1>{}); return;
    case 2: kernel(std::integral_constant<int, 2>{}); return;
    case 3: kernel(std::integral_constant<int, 3>{}); return;
    case 4: kernel(std::integral_constant<int, 4>{}); return;
    case 5: kernel(std::integral_constant<int, 5>{}); return;
    case 6: kernel(std::integral_constant<int, 6>{}); return;
    case 7: kernel(std::integral_constant<int, 7>{}); return;
    case 8: kernel(std::integral_constant<int, 8>{}); return;
    default: kernel(std::integral_constant<int, 0>{}); return;
  }
}
static_assert(kUnrolledColumns == 8, "with_unrolled_size lists every unrolled size");

}  // namespace tallyd::glm
