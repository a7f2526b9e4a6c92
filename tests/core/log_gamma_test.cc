#include "core/log_gamma.h"

#include <cmath>

#include <catch2/catch.hpp>

using namespace tallyd;

// Gamma(1/2) = sqrt(pi) and Gamma(-1/2) = -2 sqrt(pi) (Abramowitz and
// Stegun 1964, 6.1.8 and 6.1.17); Gamma(n + 1) = n!.
TEST_CASE("log_gamma gives log |Gamma(x)|, the same values as std::lgamma", "[core]") {
  CHECK(log_gamma(0.5) == Approx(0.5 * std::log(M_PI)).epsilon(1e-15));
  CHECK(log_gamma(-0.5) == Approx(std::log(2 * std::sqrt(M_PI))).epsilon(1e-15));
  CHECK(log_gamma(11) == Approx(std::log(3628800.0)).epsilon(1e-15));
  for (const double x : {1e-3, 0.5, 1.0, 2.5, 7.0, 31.25, 140.0, 1e4, 3.7e6})
    CHECK(log_gamma(x) == std::lgamma(x));  // bit-identical: both are glibc's lgamma_r
}

TEST_CASE("log_gamma leaves the process-wide signgam alone", "[core]") {
  signgam = 7;
  CHECK(log_gamma(-0.5) == Approx(std::log(2 * std::sqrt(M_PI))).epsilon(1e-15));  // Gamma(-0.5) < 0
  CHECK(signgam == 7);
  (void)std::lgamma(-0.5);  // the reason for log_gamma: lgamma does write it
  CHECK(signgam == -1);
}
