// Families (count distributions) and link functions of the Poisson-family GLMs.
#pragma once

#include <optional>
#include <string_view>

namespace tallyd::glm {

enum class Family {
  poisson,       // Var(Y) = mu
  quasipoisson,  // Var(Y) = phi * mu, phi estimated by Pearson chi^2 / df; no likelihood, no AIC
  negbin,        // NB2: Var(Y) = mu + mu^2 / theta, theta by maximum likelihood
};

enum class Link {
  log,       // eta = log(mu); canonical for Poisson
  sqrt,      // eta = sqrt(mu)
  identity,  // eta = mu; needs step-halving to keep mu > 0
};

std::string_view to_string(Family f);
std::string_view to_string(Link l);
std::optional<Family> parse_family(std::string_view text);  // "poisson", "quasipoisson", "negbin"
std::optional<Link> parse_link(std::string_view text);      // "log", "sqrt", "identity"

// Link function g(mu) and its inverse. For sqrt and identity, the inverse
// clamps a negative eta to mu = 0 (a mean count cannot be negative).
double link_fun(Link link, double mu);
double link_inv(Link link, double eta);
// d mu / d eta at eta.
double mu_eta(Link link, double eta);
// True when eta maps to a usable mean (mu > 0) under this link.
bool valid_eta(Link link, double eta);

}  // namespace tallyd::glm
