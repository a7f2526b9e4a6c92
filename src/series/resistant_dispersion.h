// Consistency factor for the quasi-Poisson dispersion of a reweighted fit.
//
// The outbreak-resistant refit (series_model.cc; Farrington et al. 1996,
// Noufaily et al. 2013) gives a record whose standardized Anscombe residual s
// exceeds the threshold c the prior weight 1/s^2, then rescales all weights
// to their old total. The weighted Pearson statistic of that fit therefore
// loses the largest residuals even when there is no outbreak at all, and its
// dispersion estimate runs low by the factor
//
//   kappa = E[v r^2] / E[v],   v = 1 if s <= c, 1/s^2 if s > c,
//
// with r the Pearson residual (E[r^2] = 1 under the model). Dividing the
// estimate by kappa makes it consistent under the model, while it stays
// resistant to the outbreaks the reweighting is there for.
//
// The expectations are sums over the count distribution that the bounds use
// for quasi-Poisson noise (Poisson for phi <= 1, otherwise negative binomial
// with the same mean and variance phi * mean): counts are right-skewed, and at
// means of 1-100 that skew roughly doubles the shrinkage that a normal
// residual would give (measured in tests/series/resistant_dispersion_test.cc).
// For a standard normal residual the factor has the closed form
//
//   kappa(c) = (1 - c phi(c)) / (1 - 2 Q(c) + phi(c)/c)
//
// (phi the density, Q the upper tail; integration by parts), used where the
// sums would be long (means above 1e4).
//
// The same reweighting biases the fitted mean low (only high residuals are
// down-weighted): for an intercept-only log-link fit the estimating equation
// sum v_i (y_i - mu) = 0 solves to E[v Y] / E[v] = mu * m in expectation, with
//
//   m = E[v Y] / (mu E[v]) = 1 + sd E[v Z] / (mu E[v])   (Z the standardized count),
//
// so dividing the fitted mean by m (subtracting log m from the intercept)
// makes it consistent under the model: the mean counterpart of kappa, in the
// spirit of the Fisher-consistency correction of Cantoni and Ronchetti
// (2001). For a normal residual E[v Z] = -phi(c) + E1(c^2/2) / (2 sqrt(2 pi)).
#pragma once

namespace tallyd {

struct ReweightedMoments {
  double dispersion_factor = 1;  // kappa
  double mean_factor = 1;        // m
};

// The normal-residual closed form above; 1 for c = +infinity.
double normal_reweighted_dispersion_factor(double threshold);

// kappa for counts of mean `mean` > 0 and dispersion `phi` > 0 (leverage
// ignored: it is about p/n). Cost: one pass over the count distribution up to
// mean + 40 sd (about 10 + 80 sqrt(phi * mean) terms). Returns the normal
// form for mean > 1e4 and 1 for a non-finite threshold or invalid arguments.
double reweighted_dispersion_factor(double threshold, double mean, double phi);

// kappa and m in one pass over the count distribution (same terms, same cost).
ReweightedMoments reweighted_moments(double threshold, double mean, double phi);

// m for a normal residual of the given mean and dispersion; 1 for c = +infinity.
double normal_reweighted_mean_factor(double threshold, double mean, double phi);

// True when a count y surely has a standardized Poisson Anscombe residual
//   s = 1.5 (y^(2/3) - mu^(2/3)) / (mu^(1/6) spread)
// at or below `threshold`, decided without cube roots: s > threshold means
// y^2 > (mu^(2/3) + c mu^(1/6))^3 with c = threshold spread / 1.5, which
// expands to mu^2 + 3c mu^(3/2) + 3c^2 mu + c^3 mu^(1/2) (one square root).
// False ("compute s") within 1e-9 relative of that boundary, so the answer
// never depends on rounding. Preconditions: mu > 0, spread > 0, threshold >= 0.
bool anscombe_surely_within(double y, double mu, double spread, double threshold);

}  // namespace tallyd
