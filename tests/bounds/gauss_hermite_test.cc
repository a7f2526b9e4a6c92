#include "bounds/gauss_hermite.h"

#include <cmath>
#include <thread>
#include <vector>

#include <boost/math/special_functions/factorials.hpp>
#include <boost/math/special_functions/gamma.hpp>
#include <boost/math/special_functions/hermite.hpp>
#include <catch2/catch.hpp>

namespace tallyd::bounds {
namespace {

const double kSqrtPi = std::sqrt(std::acos(-1.0));

bool close(double got, double want, double relative) {
  return std::fabs(got - want) <= relative * std::fabs(want);
}

TEST_CASE("small Gauss-Hermite rules have their closed forms", "[bounds]") {
  // n = 1: node 0, weight sqrt(pi). n = 2: roots of H_2 = 4x^2 - 2, weights
  // sqrt(pi)/2. n = 3: roots 0, +-sqrt(3/2) of H_3 = 8x^3 - 12x, weights
  // 2 sqrt(pi)/3 and sqrt(pi)/6: closed forms, worked out from the weight
  // formula in the next test.
  const HermiteRule& one = gauss_hermite(1);
  REQUIRE(one.nodes.size() == 1);
  CHECK(one.nodes[0] == 0);
  CHECK(close(one.weights[0], kSqrtPi, 1e-15));

  const HermiteRule& two = gauss_hermite(2);
  CHECK(close(two.nodes[1], std::sqrt(0.5), 1e-15));
  CHECK(two.nodes[0] == -two.nodes[1]);
  CHECK(close(two.weights[0], kSqrtPi / 2, 1e-15));

  const HermiteRule& three = gauss_hermite(3);
  CHECK(three.nodes[1] == 0);
  CHECK(close(three.nodes[2], std::sqrt(1.5), 1e-15));
  CHECK(close(three.weights[1], 2 * kSqrtPi / 3, 1e-15));
  CHECK(close(three.weights[2], kSqrtPi / 6, 1e-15));
}

TEST_CASE("every weight matches the Hermite-polynomial formula", "[bounds]") {
  // w_i = 2^(n-1) n! sqrt(pi) / (n^2 H_{n-1}(x_i)^2), the standard
  // Gauss-Hermite weight formula (Abramowitz and Stegun 1964, eq. 25.4.46;
  // equation number from memory), with H_n from Boost.Math. The outer weights are tiny
  // (~1e-36 for n = 48); this is where Golub-Welsch alone loses them.
  for (const int n : {5, 20, 48, 96}) {
    const HermiteRule& rule = gauss_hermite(n);
    REQUIRE(static_cast<int>(rule.nodes.size()) == n);
    const double numerator = std::ldexp(boost::math::factorial<double>(static_cast<unsigned>(n)), n - 1) * kSqrtPi;
    for (int i = 0; i < n; ++i) {
      const double x = rule.nodes[static_cast<std::size_t>(i)];
      const double h = boost::math::hermite(static_cast<unsigned>(n - 1), x);
      INFO("n " << n << " node " << i);
      CHECK(close(rule.weights[static_cast<std::size_t>(i)], numerator / (double(n) * n * h * h), 1e-11));
      // And x is a root of H_n, relative to the size of H_n's terms there.
      CHECK(std::fabs(boost::math::hermite(static_cast<unsigned>(n), x)) <=
            1e-11 * std::fabs(2 * n * h));
      if (i > 0) CHECK(x > rule.nodes[static_cast<std::size_t>(i - 1)]);
    }
  }
}

TEST_CASE("rules integrate polynomials exactly", "[bounds]") {
  // integral x^(2j) exp(-x^2) dx = Gamma(j + 1/2) (Boost.Math tgamma), exact
  // for 2j <= 2n - 1; odd moments vanish by symmetry.
  for (const int n : {4, 20, 48, 96}) {
    const HermiteRule& rule = gauss_hermite(n);
    for (int j = 0; 2 * j <= std::min(2 * n - 1, 60); ++j) {
      double even = 0, odd = 0;
      for (std::size_t i = 0; i < rule.nodes.size(); ++i) {
        even += rule.weights[i] * std::pow(rule.nodes[i], 2 * j);
        odd += rule.weights[i] * std::pow(rule.nodes[i], 2 * j + 1);
      }
      INFO("n " << n << " degree " << 2 * j);
      CHECK(close(even, boost::math::tgamma(j + 0.5), 1e-12));
      CHECK(std::fabs(odd) <= 1e-12 * boost::math::tgamma(j + 1.0));
    }
  }
}

TEST_CASE("the lognormal mean comes out to full accuracy", "[bounds]") {
  // E exp(m + s Z) = exp(m + s^2 / 2) for Z ~ N(0, 1) (lognormal mean; common practice).
  const HermiteRule& rule = gauss_hermite(48);
  for (const double s : {0.1, 0.5, 1.0}) {
    double sum = 0;
    for (std::size_t i = 0; i < rule.nodes.size(); ++i) {
      sum += rule.weights[i] / kSqrtPi * std::exp(1.5 + s * std::sqrt(2.0) * rule.nodes[i]);
    }
    CHECK(close(sum, std::exp(1.5 + s * s / 2), 1e-13));
  }
}

TEST_CASE("rules are built once and shared across threads", "[bounds]") {
  std::vector<const HermiteRule*> seen(4, nullptr);
  std::vector<std::thread> threads;
  for (std::size_t t = 0; t < seen.size(); ++t) {
    threads.emplace_back([&seen, t] { seen[t] = &gauss_hermite(37); });
  }
  for (std::thread& thread : threads) thread.join();
  for (const HermiteRule* rule : seen) CHECK(rule == &gauss_hermite(37));
  // Out-of-range counts are clamped, never out of bounds.
  CHECK(gauss_hermite(0).nodes.size() == 1);
  CHECK(gauss_hermite(100000).nodes.size() == static_cast<std::size_t>(kMaxHermiteNodes));
}

}  // namespace
}  // namespace tallyd::bounds
