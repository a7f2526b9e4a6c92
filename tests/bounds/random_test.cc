#include "bounds/random.h"

#include <algorithm>
#include <array>
#include <cmath>
#include <cstdint>
#include <map>
#include <vector>

#include <boost/math/distributions/gamma.hpp>
#include <boost/math/distributions/negative_binomial.hpp>
#include <boost/math/distributions/normal.hpp>
#include <boost/math/distributions/poisson.hpp>
#include <catch2/catch.hpp>

#include "support/fit_checks.h"

namespace tallyd::bounds {
namespace {

using testing::check_goodness_of_fit;
using testing::check_kolmogorov_smirnov;
using testing::check_moments;
using testing::sample_moments;

TEST_CASE("stable_hash is FNV-1a 64", "[bounds]") {
  // Test vectors of the FNV reference code (Fowler, Noll and Vo, test_fnv.c).
  CHECK(stable_hash("") == 0xcbf29ce484222325ULL);
  CHECK(stable_hash("a") == 0xaf63dc4c8601ec8cULL);
  CHECK(stable_hash("foobar") == 0x85944171f73967e8ULL);
}

TEST_CASE("splitmix64 matches the reference implementation", "[bounds]") {
  // First five outputs of Vigna's splitmix64.c for seed 1234567, as listed on
  // Rosetta Code, "Pseudo-random numbers/Splitmix64"; also re-derived here
  // with an independent arbitrary-precision implementation.
  std::uint64_t state = 1234567;
  CHECK(splitmix64_next(state) == 6457827717110365317ULL);
  CHECK(splitmix64_next(state) == 3203168211198807973ULL);
  CHECK(splitmix64_next(state) == 9817491932198370423ULL);
  CHECK(splitmix64_next(state) == 4593380528125082431ULL);
  CHECK(splitmix64_next(state) == 16408922859458223821ULL);
}

TEST_CASE("xoshiro256** matches the reference implementation", "[bounds]") {
  // Outputs of Blackman and Vigna's xoshiro256starstar.c from state
  // {1, 2, 3, 4}, as in the reference test of the rand_xoshiro crate.
  Rng rng = Rng::from_state({1, 2, 3, 4});
  const std::array<std::uint64_t, 10> expected = {11520ULL,
                                                  0ULL,
                                                  1509978240ULL,
                                                  1215971899390074240ULL,
                                                  1216172134540287360ULL,
                                                  607988272756665600ULL,
                                                  16172922978634559625ULL,
                                                  8476171486693032832ULL,
                                                  10595114339597558777ULL,
                                                  2904607092377533576ULL};
  for (const std::uint64_t value : expected) CHECK(rng.next_u64() == value);
}

// The xoshiro256** state whose next output is `target`: the output is
// rotl(s1 * 5, 7) * 9, and 5 and 9 are invertible modulo 2^64.
std::array<std::uint64_t, 4> state_giving(std::uint64_t target) {
  const auto inverse = [](std::uint64_t a) {
    std::uint64_t x = a;  // Newton's iteration for 1/a mod 2^64; a odd
    for (int i = 0; i < 6; ++i) x *= 2 - a * x;
    return x;
  };
  const std::uint64_t rotated = target * inverse(9);
  const std::uint64_t product = (rotated >> 7) | (rotated << 57);
  return {1, product * inverse(5), 0, 0};
}

TEST_CASE("uniform never returns 0 or 1", "[bounds]") {
  constexpr double kStep = 1.0 / 9007199254740992.0;  // 2^-53
  // The reference stream above yields 11520, then 0, then 1509978240: the
  // zero is skipped, the others map to (x >> 11) * 2^-53.
  Rng rng = Rng::from_state({1, 2, 3, 4});
  CHECK(rng.uniform() == 5 * kStep);
  CHECK(rng.uniform() == (1509978240ULL >> 11) * kStep);

  Rng all_ones = Rng::from_state(state_giving(~0ULL));
  Rng copy = all_ones;
  REQUIRE(copy.next_u64() == ~0ULL);
  const double top = all_ones.uniform();
  CHECK(top < 1.0);
  CHECK(top == 1.0 - kStep);

  Rng zero = Rng::from_state(state_giving(0));
  copy = zero;
  REQUIRE(copy.next_u64() == 0);
  CHECK(zero.uniform() > 0.0);
}

TEST_CASE("for_record streams are reproducible and distinct", "[bounds]") {
  const auto first = [](Rng rng) {
    std::array<std::uint64_t, 4> out{};
    for (std::uint64_t& x : out) x = rng.next_u64();
    return out;
  };
  const auto base = first(Rng::for_record(7, "trap-north", 1700000000));
  CHECK(base == first(Rng::for_record(7, "trap-north", 1700000000)));
  CHECK(base != first(Rng::for_record(8, "trap-north", 1700000000)));
  CHECK(base != first(Rng::for_record(7, "trap-south", 1700000000)));
  CHECK(base != first(Rng::for_record(7, "trap-north", 1700000001)));
  CHECK(base != first(Rng::for_record(7, "trap-north", -1700000000)));
  // Swapping what goes where must not collide either.
  CHECK(first(Rng::for_record(1, "", 2)) != first(Rng::for_record(2, "", 1)));

  // The samplers are deterministic too (the normal keeps its spare value).
  Rng a = Rng::for_record(3, "s", 5), b = Rng::for_record(3, "s", 5);
  for (int i = 0; i < 1000; ++i) {
    REQUIRE(a.normal() == b.normal());
    REQUIRE(a.gamma(0.7) == b.gamma(0.7));
    REQUIRE(a.poisson(25.0) == b.poisson(25.0));
    REQUIRE(a.negbin(12.0, 2.5) == b.negbin(12.0, 2.5));
  }
}

TEST_CASE("normal draws follow N(0, 1)", "[bounds]") {
  constexpr int n = 200000;
  Rng rng(11);
  std::vector<double> draws(n);
  for (double& x : draws) x = rng.normal();
  const boost::math::normal_distribution<> reference(0, 1);
  std::size_t i = 0;
  check_moments(sample_moments(n, [&] { return draws[i++]; }), reference, n);
  check_kolmogorov_smirnov(draws, reference);
}

TEST_CASE("gamma draws follow Gamma(shape, 1)", "[bounds]") {
  constexpr int n = 100000;
  Rng rng(12);
  for (const double shape : {0.05, 0.3, 1.0, 2.5, 40.0}) {
    INFO("shape " << shape);
    std::vector<double> draws(n);
    for (double& x : draws) x = rng.gamma(shape);
    const boost::math::gamma_distribution<> reference(shape, 1.0);
    std::size_t i = 0;
    check_moments(sample_moments(n, [&] { return draws[i++]; }), reference, n);
    check_kolmogorov_smirnov(draws, reference);
  }
  CHECK(rng.gamma(0) == 0);
  CHECK(rng.gamma(-1) == 0);
  CHECK(rng.gamma(std::nan("")) == 0);
}

TEST_CASE("poisson draws follow Poisson(mean)", "[bounds]") {
  Rng rng(13);
  // 0.3 and 4 use inversion; 9.99 and 10 sit on either side of the switch
  // to PTRS, whose constants are least forgiving at its smallest mean.
  // PTRS is exact rejection, so a wrong constant only biases the draws
  // slightly (a +0.5 slip in its 0.43 offset moves the mean at 10 by ~7
  // standard errors of a million draws, by 3 of 200,000): hence the larger n there.
  for (const double mean : {0.3, 4.0, 9.99, 10.0, 30.0, 1000.0}) {
    INFO("mean " << mean);
    const int n = mean < 10 ? 200000 : 1000000;
    std::vector<std::int64_t> draws(n);
    for (std::int64_t& y : draws) y = rng.poisson(mean);
    const boost::math::poisson_distribution<> reference(mean);
    std::size_t i = 0;
    check_moments(sample_moments(n, [&] { return static_cast<double>(draws[i++]); }), reference, n);
    check_goodness_of_fit(draws, reference);
  }
  CHECK(rng.poisson(0) == 0);
  CHECK(rng.poisson(-2) == 0);
  CHECK(rng.poisson(std::nan("")) == 0);
  // A huge mean is clamped, not undefined: the draw is near 2^52.
  const double huge = static_cast<double>(rng.poisson(1e300));
  CHECK(std::fabs(huge - Rng::kMaxPoissonMean) < 10 * std::sqrt(Rng::kMaxPoissonMean));
}

TEST_CASE("negbin draws follow NB2(mean, theta)", "[bounds]") {
  constexpr int n = 200000;
  Rng rng(14);
  struct Case {
    double mean, theta;
  };
  for (const Case c : {Case{0.8, 0.5}, Case{5.0, 1.0}, Case{40.0, 3.0}, Case{300.0, 20.0}}) {
    INFO("mean " << c.mean << " theta " << c.theta);
    std::vector<std::int64_t> draws(n);
    for (std::int64_t& y : draws) y = rng.negbin(c.mean, c.theta);
    // Boost's negative_binomial(r, p) counts failures before the r-th
    // success: NB2 with size r = theta and p = theta / (theta + mean).
    const boost::math::negative_binomial_distribution<> reference(c.theta, c.theta / (c.theta + c.mean));
    std::size_t i = 0;
    check_moments(sample_moments(n, [&] { return static_cast<double>(draws[i++]); }), reference, n);
    check_goodness_of_fit(draws, reference);
  }
  // theta 0 or infinite is the Poisson limit: same stream as poisson().
  Rng a(15), b(15);
  for (int i = 0; i < 100; ++i) {
    REQUIRE(a.negbin(7.0, 0) == b.poisson(7.0));
    REQUIRE(a.negbin(7.0, INFINITY) == b.poisson(7.0));
  }
}

}  // namespace
}  // namespace tallyd::bounds
