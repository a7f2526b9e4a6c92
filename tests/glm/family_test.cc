#include "glm/family.h"

#include <cmath>

#include <catch2/catch.hpp>

using tallyd::glm::Family;
using tallyd::glm::Link;
namespace glm = tallyd::glm;

TEST_CASE("family and link names round-trip and reject unknown text", "[glm]") {
  for (Family f : {Family::poisson, Family::quasipoisson, Family::negbin}) {
    CHECK(glm::parse_family(glm::to_string(f)) == f);
  }
  for (Link l : {Link::log, Link::sqrt, Link::identity}) {
    CHECK(glm::parse_link(glm::to_string(l)) == l);
  }
  CHECK_FALSE(glm::parse_family("Poisson").has_value());
  CHECK_FALSE(glm::parse_family("").has_value());
  CHECK_FALSE(glm::parse_link("logit").has_value());
}

// The definitions of the three links and of their inverses and
// derivatives (common practice).
TEST_CASE("link functions, inverses and derivatives", "[glm]") {
  CHECK(glm::link_fun(Link::log, std::exp(1.5)) == Approx(1.5));
  CHECK(glm::link_fun(Link::sqrt, 6.25) == Approx(2.5));
  CHECK(glm::link_fun(Link::identity, 3.0) == 3.0);

  for (Link l : {Link::log, Link::sqrt, Link::identity}) {
    for (double mu : {0.01, 0.5, 1.0, 7.0, 1234.5}) {
      INFO(glm::to_string(l) << " mu " << mu);
      const double eta = glm::link_fun(l, mu);
      CHECK(glm::link_inv(l, eta) == Approx(mu).epsilon(1e-14));
      CHECK(glm::valid_eta(l, eta));
      // d mu / d eta: exp(eta), 2 eta, 1 (derivatives of the inverses).
      const double expected = l == Link::log ? mu : l == Link::sqrt ? 2 * std::sqrt(mu) : 1.0;
      CHECK(glm::mu_eta(l, eta) == Approx(expected).epsilon(1e-14));
    }
  }
}

TEST_CASE("a negative or non-finite linear predictor is not a valid mean", "[glm]") {
  // sqrt and identity: eta <= 0 would give a mean of 0 or below; the inverse
  // clamps it to 0 and valid_eta says no.
  for (Link l : {Link::sqrt, Link::identity}) {
    CHECK_FALSE(glm::valid_eta(l, -0.5));
    CHECK_FALSE(glm::valid_eta(l, 0.0));
    CHECK(glm::link_inv(l, -0.5) == 0.0);
  }
  // log: every finite eta gives mu > 0 until exp underflows to 0.
  CHECK(glm::valid_eta(Link::log, -700.0));
  CHECK_FALSE(glm::valid_eta(Link::log, -800.0));
  for (Link l : {Link::log, Link::sqrt, Link::identity}) {
    CHECK_FALSE(glm::valid_eta(l, std::nan("")));
    CHECK_FALSE(glm::valid_eta(l, INFINITY));
  }
}
