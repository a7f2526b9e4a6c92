#include "bounds/tail_floor.h"

#include <algorithm>
#include <cmath>
#include <limits>

#include "core/log_gamma.h"

namespace tallyd::bounds {
namespace {

constexpr double kEps = std::numeric_limits<double>::epsilon();
// Charged per term of the log-pmf, in units of kEps times the largest
// magnitude among the terms: glibc's lgamma, log and log1p are within a few
// ulps (their documented bounds are below 10), and five terms are summed.
constexpr double kLogTermUlps = 32;
// Floors whose charge on the log-pmf would exceed this are not worth having.
constexpr double kMaxCharge = 1e-3;
// Relative slack on the geometric sum and on Cantelli's bound: their own
// rounding is a few hundred ulps at most (a log and two expm1 of arguments
// below ~700 in size).
constexpr double kSumSlack = 1e-10;
// Longest run of pmf terms (steps), whatever the reach asks.
constexpr double kMaxRun = 1e6;
// Runs tried, in noise standard deviations: near the mean of a Poisson law
// the floor pmf(y) (1 - rho^(J+1)) / (1 - rho) peaks at about 1.1 sd, where it
// is half the true tail; the shorter and longer runs serve counts a little
// below or beyond the mean.
constexpr double kRunReaches[] = {1.2, 0.6, 2.4};

struct Law {
  bool poisson;
  double mu, r, q, var;
  double ratio_slack;  // relative: a computed neighbour ratio may exceed the law's by this
};

Law law_of(const NoiseAt& d) {
  Law l{d.poisson, d.mu, d.poisson ? 0 : d.size, d.poisson ? 0 : d.q, 0, 8 * kEps};
  l.var = d.poisson ? d.mu : d.mu + d.mu * d.mu / d.size;
  // NB2: the exact tails read p, the recurrences q; the two differ by a
  // rounding of 1, i.e. by kEps / q relative in q and kEps / p in p.
  if (!d.poisson) l.ratio_slack += 4 * kEps / std::min(d.p, d.q);
  return l;
}

// pmf(k + 1) / pmf(k).
double up_ratio(const Law& l, double k) { return (l.poisson ? l.mu : (k + l.r) * l.q) / (k + 1); }

// log P(Y = y) less a bound on its rounding error; NaN when that bound is
// too large to be of use.
double log_pmf_floor(const NoiseAt& d, double y) {
  double a = 0, b = 0, c = 0, charge = 1e-14;
  if (d.poisson) {
    a = y > 0 ? y * std::log(d.mu) : 0;
    b = -d.mu;
    c = -log_gamma(y + 1);
  } else {
    // P(Y = y) = Gamma(y + r) / (Gamma(r) y!) p^r q^y.
    if (y > 0) {
      const double g1 = log_gamma(y + d.size), g2 = log_gamma(d.size), g3 = log_gamma(y + 1);
      a = g1 - g2 - g3;
      charge += kLogTermUlps * kEps * (std::abs(g1) + std::abs(g2) + std::abs(g3));
      c = y * std::log(d.q);
    }
    b = d.size * std::log1p(-d.q);
    // q against 1 - p: d log pmf / dq = y / q - r / p, times a rounding of 1.
    charge += 4 * kEps * (y / d.q + d.size / d.p);
  }
  charge += kLogTermUlps * kEps * (std::abs(a) + std::abs(b) + std::abs(c));
  const double value = a + b + c - charge;
  if (!(charge < kMaxCharge) || !std::isfinite(value)) return std::numeric_limits<double>::quiet_NaN();
  return value;
}

// 1 + rho + ... + rho^(n - 1), less kSumSlack; 0 when it would overflow.
double geometric(double rho, double n) {
  if (rho == 1) return n * (1 - kSumSlack);
  const double l = std::log(rho);
  if (n * l > 600) return 0;
  const double g = std::expm1(n * l) / std::expm1(l);
  return std::isfinite(g) ? g * (1 - kSumSlack) : 0;
}

// 1 - var / (var + t^2) for t > 0, less its rounding; 0 otherwise.
double cantelli(double var, double t) {
  if (!(t > 0)) return 0;
  const double c = var / (var + t * t);
  return std::max(0.0, 1 - c * (1 + kSumSlack) - 4 * kEps);
}

}  // namespace

TailFloor tail_floor(const NoiseAt& d, std::int64_t observed, double wanted) {
  TailFloor f;
  if (observed < 0) return f;
  if (d.at_zero) return {observed == 0 ? 1.0 : 0.0, 1.0};
  const double y = static_cast<double>(observed);
  const Law l = law_of(d);
  // The law's mean as the tails see it is within a rounding of 1 (relative to
  // mu + r) of d.mu; take that off each side's distance.
  const double mean_slack = 8 * kEps * (l.mu + l.r + y);
  f.at_least = observed == 0 ? 1.0 : cantelli(l.var, l.mu - y + 1 - mean_slack);
  f.at_most = cantelli(l.var, y + 1 - l.mu - mean_slack);
  if (f.at_least > wanted && f.at_most > wanted) return f;

  const double log_pmf = log_pmf_floor(d, y);
  if (std::isnan(log_pmf)) return f;
  const double pmf = std::exp(log_pmf);
  const double sd = std::sqrt(l.var);
  const double shrink = 1 - l.ratio_slack;
  for (const double reach : kRunReaches) {
    const double run = std::clamp(std::ceil(reach * sd), 1.0, kMaxRun);
    if (!(f.at_least > wanted)) {
      // Steps y -> y + run use the ratios at y .. y + run - 1.
      const double rho = std::min(up_ratio(l, y), up_ratio(l, y + run - 1)) * shrink;
      f.at_least = std::max(f.at_least, std::min(1.0, pmf * geometric(rho, run + 1)));
    }
    if (!(f.at_most > wanted)) {
      // Steps y -> y - j, j <= run <= y, use pmf(k - 1) / pmf(k) = 1 / up_ratio(k - 1) for k = y .. y - j + 1.
      const double down = std::min(run, y);
      double sum = 1;
      if (down > 0) {
        const double rho = std::min(1 / up_ratio(l, y - 1), 1 / up_ratio(l, y - down)) * shrink;
        sum = geometric(rho, down + 1);
      }
      f.at_most = std::max(f.at_most, std::min(1.0, pmf * sum));
    }
    if (f.at_least > wanted && f.at_most > wanted) break;
  }
  return f;
}

}  // namespace tallyd::bounds
