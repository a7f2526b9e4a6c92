// The predictive distribution of one new count, and its bounds.
//
// Given the fitted model's linear predictor for the new record (mean and
// variance of eta = x'beta + offset, the variance x' Cov(beta) x carrying
// parameter uncertainty), the predictive distribution is the mixture
//   Y ~ CountNoise(mu = g^{-1}(eta*)),  eta* ~ N(eta_mean, eta_variance),
// where CountNoise is Poisson, NB2 with size theta, or (quasi-Poisson) NB2
// with Var = phi * mu, i.e. size mu / (phi - 1); Poisson when phi <= 1.
// Two ways to evaluate it:
//   simulate   - draw eta*, then a count; quantiles and tail probabilities
//                are those of the empirical distribution of the draws;
//   quadrature - Gauss-Hermite quadrature over eta*, with exact count CDFs
//                (Boost.Math), so no Monte Carlo error.
// Pure functions apart from the Rng passed in; thread-safe.
#pragma once

#include <cstdint>
#include <optional>
#include <string_view>

#include "bounds/random.h"
#include "glm/family.h"

namespace tallyd::bounds {

enum class Method { simulate, quadrature };
std::string_view to_string(Method m);
std::optional<Method> parse_method(std::string_view text);  // "simulate", "quadrature"

// What the fitted model says about the new record.
struct Predictor {
  double eta_mean = 0;      // x'beta_hat + offset (offset = log exposure for the log link)
  double eta_variance = 0;  // x' Cov(beta_hat) x, >= 0
};

// The count noise around mu.
struct CountNoise {
  glm::Family family = glm::Family::poisson;
  glm::Link link = glm::Link::log;
  double dispersion = 1;  // quasi-Poisson phi; ignored otherwise
  double theta = 0;       // negbin size; +inf or 0 means Poisson limit
};

struct Options {
  Method method = Method::quadrature;
  int draws = 10000;          // simulate: number of draws
  int quadrature_nodes = 48;  // quadrature: Gauss-Hermite nodes
  double alpha = 0.001;       // one-sided tail probability for each bound
};

struct Bounds {
  double expected = 0;      // predictive mean E[Y] = E[mu(eta*)]
  std::int64_t lower = 0;   // smallest l with P(Y <= l) > alpha: a count below it is unusually low
  std::int64_t upper = 0;   // smallest u with P(Y <= u) >= 1 - alpha: a count above it is unusually high
  double p_high = 1;        // P(Y >= observed)
  double p_low = 1;         // P(Y <= observed)
};

// Evaluates the predictive distribution at `observed`.
// With Method::simulate `rng` must be non-null (it is advanced); with
// quadrature it is ignored. By construction observed > upper exactly when
// p_high <= alpha, and observed < lower exactly when p_low <= alpha.
Bounds evaluate(const Predictor& predictor, const CountNoise& noise, std::int64_t observed,
                const Options& options, Rng* rng);

// Exact count-noise CDF P(Y <= k | mu), Boost.Math based; k < 0 gives 0.
double noise_cdf(const CountNoise& noise, double mu, std::int64_t k);

}  // namespace tallyd::bounds
