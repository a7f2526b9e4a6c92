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
// Pure functions apart from the Rng passed in; thread-safe; never throw.
//
// Cost of one evaluate(), in operations (rough timings on one x86-64 core,
// -O2, from a throwaway timing loop; no benchmark in the repo yet):
//   quadrature: a few "probes" (one Boost.Math incomplete gamma or beta per
//     node, ~0.1-1 us each) plus recurrence steps between neighbouring
//     counts (a multiply-add per node). Typically 1-3 probes: ~1 us with
//     eta_variance == 0 (one node); ~7-10 us with 48 nodes for Poisson or
//     NB2; ~25-40 us for quasi-Poisson (incomplete beta with a size per
//     node). Below the mean Boost.Math 1.74 sums O(sqrt(mu)) terms, so large
//     means cost more: ~40 us at mu = 1e3, ~200 us at 1e5.
//   simulate: O(draws); 10,000 draws ~0.5 ms (Poisson) to ~1.2 ms (NB2) with
//     Rng's own samplers, less with count_sampler.h's (docs/benchmarks.md).
//
// Accuracy of the quadrature over eta*. Each value of eta* carries a count
// distribution whose width on the eta scale is the noise's (log link,
// Poisson: 1/sqrt(count)). Let rho = sd(eta*) / that width at the counts
// that matter (both bounds; log link, Poisson:
// rho ~ sqrt(eta_variance * upper)). Gauss-Hermite samples eta* at fixed
// nodes, and once the noise is narrow next to their spacing the mixture
// becomes a comb of separate bumps: with 48 nodes the relative error of the
// tails at the bounds was < 1e-10 for rho <~ 1.8 but 1% - 90% for rho >~ 5
// (mean 2000, eta_variance 0.02: 9% at alpha 1e-3). So the rule is chosen
// per call (quadrature.h, choose_rule):
//   rho <= 1.5: Gauss-Hermite with quadrature_nodes nodes;
//   rho >  1.5: a trapezoid grid in eta over +-12 sd(eta*) with 3 steps per
//     min(sd(eta*), noise width), i.e. ~72 max(1, rho) nodes, at most
//     Options::grid_node_limit (the bracketing grid below takes over there).
// The count pmfs and CDFs are smooth (analytic) functions of eta, so the
// trapezoid rule on this Gaussian-weighted integrand converges
// geometrically in 1/step; tested against Boost.Math's adaptive
// Gauss-Kronrod at rho ~ 4-16 to 1e-8 relative (tests/bounds/quadrature_test.cc)
// and against simulation at 10^6 draws. Cost grows with rho: each probe is
// one Boost.Math tail per node (~0.1-1 us each). Limits: the step follows
// the noise at the bounds, so p-values of counts far beyond them (narrower
// noise still) lose relative accuracy, though never their side of alpha,
// which the bounds settle; Gaussian mass beyond 12 sd (~4e-33) is
// dropped, so p-values far below that lose relative accuracy; the sqrt and
// identity links clamp mu at 0, a kink either rule resolves poorly when
// eta* has mass near 0. Simulation has none of these limits.
//
// Bounded work: the bracketing grid. The grid wants ~72 rho nodes, and rho
// grows as exp(z_alpha sd / 2) under the log link: a poorly identified fit
// (sd(eta*) of 1-5, as when two annual harmonics rest on five months of
// records and are extrapolated) wanted 16384 nodes and took 0.1-20 s per
// record (docs/benchmarks.md, "Judging on a poorly identified fit"). When
// the grid wants more than Options::grid_node_limit nodes (N), it takes N
// nodes over +-H sd, P(|Z| > H) = 2e-16 alpha, and each side is judged on
// a mixture that puts every bin's exact Gaussian mass at the bin's outer
// edge (mixture.h, bracket_mixtures): its tail is an upper bound on the
// true mixture's, at most a relative c / (1 - c) above it, c = H D + D^2/2,
// D = 2H / (N - 1) (N = 2048, alpha = 1e-3: H = 9.01, c = 0.079, 8.6%).
// So a bracketed record alerts only when the true mixture's p-value is at
// or below alpha (up to the rounding above): the verdict is conservative,
// and a record whose true p-value lies within that margin below alpha is
// not flagged. The reported p-values and bounds are those upper bounds.
// Work per record is then at most N component tails per probe and N
// multiply-adds per step, whatever the fit; components clamped at the
// largest mean (1e9) are pooled into one. 0 keeps the earlier cut at 16384
// nodes (rho >~ 227): a plain trapezoid whose error is then unbounded.
#pragma once

#include <cstdint>
#include <optional>
#include <string_view>

#include "bounds/random.h"
#include "glm/family.h"

namespace tallyd::bounds {

enum class Method { simulate, quadrature };
std::string_view to_string(Method m);
std::optional<Method> parse_method(std::string_view text);  // "simulate", "quadrature"; nullopt otherwise

// What the fitted model says about the new record.
struct Predictor {
  double eta_mean = 0;      // x'beta_hat + offset (offset = log exposure for the log link)
  double eta_variance = 0;  // x' Cov(beta_hat) x, >= 0 (a negative value is taken as 0)
};

// The count noise around mu.
struct CountNoise {
  glm::Family family = glm::Family::poisson;
  glm::Link link = glm::Link::log;
  double dispersion = 1;  // quasi-Poisson phi; phi <= 1 (or not finite) means Poisson; ignored otherwise
  double theta = 0;       // negbin size; 0, +inf or NaN means the Poisson limit
};

// Options::grid_node_limit's default (see "Accuracy of the quadrature").
inline constexpr int kDefaultGridNodeLimit = 2048;

// The upper normal quantile of a one-sided alpha, z with P(Z > z) = alpha:
// Boost.Math's erfc_inv costs ~0.4 us, comparable to judging a whole record
// the screen settles, so a caller judging many records at one alpha
// computes it once (upper_quantile) and passes it in Options.
struct AlphaQuantile {
  double alpha = 0;  // the alpha z belongs to; 0: none (evaluate computes z itself)
  double z = 0;
};
AlphaQuantile upper_quantile(double alpha);  // alpha clamped as in evaluate

struct Options {
  Method method = Method::quadrature;
  int draws = 10000;          // simulate: number of draws (at least 1 is used)
  int quadrature_nodes = 48;  // quadrature: Gauss-Hermite nodes, clamped to [1, 256]; 1 when eta_variance == 0.
                              // Used while rho <= 1.5; a grid rule otherwise. See "Accuracy of the quadrature" above.
  double alpha = 0.001;       // one-sided tail probability for each bound; clamped to [1e-300, 0.5]
  AlphaQuantile quantile;     // used when quantile.alpha is alpha after clamping; computed per call otherwise
  int grid_node_limit = kDefaultGridNodeLimit;  // quadrature: most grid nodes before the bracketing grid
                              // takes over (see "Accuracy of the quadrature"); clamped to [64, 16384];
                              // 0: no bracketing, the grid is cut at 16384 nodes as before.
  bool screen = false;        // settle records that provably raise no alert before the full evaluation
                              // (bounds/screen.h): never changes a quadrature verdict; changes a simulate
                              // verdict with probability <= 2e-12 per record; simulate's draws also stop
                              // once neither side can alert (exact, simulate.h). Settled records come back
                              // with `screened` set and without integer bounds (see Bounds).
  double wanted_floor = 0;    // with the screen: a record is settled by its cheapest stage (no special
                              // function) only when both p-value floors also exceed this; otherwise the
                              // exact tails are taken first (bounds/screen.h). SeriesModel::predict sets
                              // model.doubt_factor * alpha while refit_on_doubt may act, so a settled
                              // record's floors decide the doubt test as exact tails would. 0: alpha alone.
                              // Simulate: setting it also says the caller refits and asks again when a
                              // p-value comes back at or below it; when every result of the draws would
                              // (simulate.h, draws_fall_below), a record the screen leaves is returned
                              // `deferred` without drawing.
};

struct Bounds {
  double expected = 0;      // predictive mean E[Y] = E[mu(eta*)]
  std::int64_t lower = 0;   // smallest l >= 0 with P(Y <= l) > alpha: a count below it is unusually low
  std::int64_t upper = 0;   // smallest u >= 0 with P(Y > u) <= alpha: a count above it is unusually high
  double p_high = 1;        // P(Y >= observed)
  double p_low = 1;         // P(Y <= observed)
  // Set when Options::screen settled the record ("no alert" on both sides)
  // without the full evaluation: lower = 0 and upper = INT64_MAX were not
  // computed, p_high and p_low are lower bounds on the p-values (both above
  // alpha; for simulate stopped early, on the full draws' p-values), and
  // expected is the quadrature mixture's mean (also for simulate). Ask again with screen off when the real values are needed.
  bool screened = false;
  // Set only with simulate, the screen and a wanted_floor that every result
  // of the draws would fall to (Options::wanted_floor): the screen did not
  // settle the record and no draws were made, because whatever they gave,
  // the caller would refit and ask again. Nothing is decided: lower = 0,
  // upper = INT64_MAX, p_high and p_low are the screen's floors (lower bounds
  // on the p-values of the predictive mixture, not of any draws) and expected
  // the quadrature mixture's mean. Never judge such a result; ask again.
  bool deferred = false;
};

// Evaluates the predictive distribution at `observed`.
//
// With Method::simulate `rng` is advanced; if it is null, quadrature is used
// instead. With quadrature `rng` is ignored. Probabilities are those of the
// mixture (quadrature) or of the empirical distribution of the draws
// (simulate; expected is then the mean of the drawn mu, not of the counts).
//
// Guarantee, for both methods and every observed count:
//   observed > upper  exactly when  p_high <= alpha,
//   observed < lower  exactly when  p_low  <= alpha,
// with alpha after clamping. Quadrature enforces it against rounding by
// using the monotonicity of the CDF (a p-value is never moved across alpha
// by more than the rounding error of the sums that produced it).
//
// Numerics (quadrature), apart from the rule's limits above: bounds are
// exact integers for the quadrature mixture's CDF as computed; the count
// tails keep ~1e-12 relative accuracy down to ~1e-30 (Boost.Math without
// long-double promotion); p-values beyond the bounds carry that relative
// error, those between the bounds ~1e-15 absolute error.
//
// Edge cases, none of which throws: observed < 0 gives p_low = 0,
// p_high = 1; a non-finite eta_mean or eta_variance, or NaN alpha, gives
// expected = NaN, lower = 0, upper = INT64_MAX, p_high = p_low = 1 (nothing
// can be flagged); means above 1e9 are treated as 1e9 (a runaway fit); the
// distribution is censored at 2^53, so no bound exceeds it and a larger
// observed count is judged as 2^53.
Bounds evaluate(const Predictor& predictor, const CountNoise& noise, std::int64_t observed,
                const Options& options, Rng* rng);

// Exact count-noise CDF P(Y <= k | mu), Boost.Math based (~1e-12 relative
// accuracy down to ~1e-30). k < 0 gives 0; mu <= 1e-300 (all mass at 0)
// gives 1 for k >= 0; mu = +inf gives 0, NaN gives NaN; other means above
// 1e9 are treated as 1e9, as in evaluate().
double noise_cdf(const CountNoise& noise, double mu, std::int64_t k);

}  // namespace tallyd::bounds
