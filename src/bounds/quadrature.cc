#include "bounds/quadrature.h"

#include <algorithm>
#include <vector>
#include <cmath>
#include <limits>

#include <boost/math/special_functions/erf.hpp>

#include "bounds/count_noise.h"
#include "bounds/mixture.h"
#include "core/log_gamma.h"

namespace tallyd::bounds {
namespace {

// A probe costs a Boost.Math tail per component (~0.1-1 us); a recurrence
// step costs a multiply-add per component (~1 ns). Stepping this far costs
// about as much as one more probe, so it is the distance covered by stepping
// before the search falls back to probing.
constexpr std::int64_t kWalk = 128;


// A position in a step sequence. `value` is the tail probability on the
// side being searched: P(Y <= k) when stepping up (lower bound), P(Y > k)
// when stepping down (upper bound). Either way it grows with every step,
// as a sum of positive terms.
struct Walker {
  std::int64_t k = -1;
  double value = 0;
  PerNode pmf{};
  std::int64_t reach = 0;  // further steps that stay sound (see safe_reach)
};

// log P(Y = k) for one component, from log-gamma: only used to bound
// components whose pmf underflowed, where a few digits are plenty.
double log_pmf(const NoiseAt& d, double k) {
  if (d.poisson) return k * std::log(d.mu) - d.mu - log_gamma(k + 1);
  return log_gamma(k + d.size) - log_gamma(d.size) - log_gamma(k + 1) + d.size * std::log1p(-d.q) +
         k * std::log(d.q);
}

// The most steps an interval search may take: two runs, plus one run of
// continuation towards the observed count.
constexpr std::int64_t kMaxReach = 3 * kWalk;

// How many steps from k in direction dir stay sound with these component
// pmfs (at most kMaxReach). Stepping multiplies pmfs, so one that
// underflowed (0 or subnormal) can never grow back. That is harmless while
// the component's true pmf stays negligible: its sum over the counts
// reached below 1e-20 alpha. The pmf is unimodal, so its largest value on
// the way is at the mode clamped into the range; the reach is the longest
// range where that holds for every such component. Those pmfs are set to 0.
std::int64_t safe_reach(const Mixture& m, std::int64_t k, int dir, double alpha, PerNode& pmf) {
  std::int64_t reach = kMaxReach;
  for (std::size_t i = 0; i < static_cast<std::size_t>(m.n); ++i) {
    if (pmf[i] >= std::numeric_limits<double>::min()) continue;
    pmf[i] = 0;
    const NoiseAt& d = m.noise[i];
    const double mode = d.poisson ? std::floor(d.mu) : std::max(0.0, std::floor((d.size - 1) * d.q / d.p));
    const double log_w = std::log(m.w[i]);
    const auto negligible = [&](std::int64_t steps) {
      const double end = static_cast<double>(std::max<std::int64_t>(k + dir * steps, 0));
      const double nearest = std::clamp(mode, std::min<double>(static_cast<double>(k), end), std::max<double>(static_cast<double>(k), end));
      return log_w + log_pmf(d, nearest) + std::log(static_cast<double>(steps + 1)) < std::log(1e-20 * alpha);
    };
    if (negligible(reach)) continue;
    std::int64_t good = -1;  // largest known negligible reach (-1: not even k itself)
    std::int64_t bad = reach;
    while (bad - good > 1) {
      const std::int64_t mid = good + (bad - good) / 2;
      (negligible(mid) ? good : bad) = mid;
    }
    reach = std::max<std::int64_t>(good, 0);
  }
  return reach;
}

// dir = +1: F(k+1) = F(k) + P(k+1). dir = -1: S(k-1) = S(k) + P(k).
// Precondition: w.reach > 0.
void step(const Mixture& m, int dir, Walker& w) {
  --w.reach;
  if (dir > 0) {
    pmf_up(m, w.k, w.pmf);
    ++w.k;
    w.value += mass(m, w.k, w.pmf);
  } else {
    w.value += mass(m, w.k, w.pmf);
    if (w.k >= 1) pmf_down(m, w.k, w.pmf);
    --w.k;
  }
}

// Where the tail region {value <= alpha} meets the body {value > alpha}:
// tail_k and body_k = tail_k + dir, with their values as computed. For the
// lower bound body_k is the bound; for the upper bound tail_k is. `walker`
// is left at tail_k or body_k with its pmfs, for stepping on towards the
// observed count.
struct Boundary {
  std::int64_t tail_k;
  double tail_value;
  std::int64_t body_k;
  double body_value;
  Walker walker;  // reach 0 when it cannot step on (or was never set)
};

// Upper-tail normal quantile: P(Z > probit(v)) = v, for v in (0, 1).
double probit(double v) { return std::sqrt(2.0) * boost::math::erfc_inv(2 * v); }

// The next probe between a tail point t and a body point b (|b - t| >= 2):
// where probit(value) crosses probit(alpha) on the line through the two
// points (count tails are close to normal-shaped, so nearly linear on that
// scale), moved up to half a stepping run towards the tail so that stepping
// back finishes the search, and kept inside the middle three quarters of the gap
// so that the gap shrinks by at least an eighth whatever the interpolation does.
std::int64_t interpolate(std::int64_t t_k, double t_value, std::int64_t b_k, double b_value, double alpha,
                         int dir, bool can_step) {
  const std::int64_t lo = std::min(t_k, b_k);
  const std::int64_t hi = std::max(t_k, b_k);
  const std::int64_t margin = (hi - lo) / 8;
  // Landing on the tail side only pays if we can step from there; and the
  // shift must not swamp a small gap.
  const double shift = can_step ? static_cast<double>(std::min<std::int64_t>(kWalk / 2, (hi - lo) / 4)) : 0.0;
  double target = 0.5 * static_cast<double>(lo + hi);
  if (t_value > 0 && b_value < 1) {
    const double q_t = probit(t_value);
    const double f = (probit(alpha) - q_t) / (probit(b_value) - q_t);
    if (std::isfinite(f)) {
      target = static_cast<double>(t_k) + f * static_cast<double>(b_k - t_k) - dir * shift;
    }
  }
  const double clamped = std::clamp(target, static_cast<double>(lo + margin), static_cast<double>(hi - margin));
  return std::clamp(static_cast<std::int64_t>(std::llround(clamped)), lo + 1, hi - 1);
}

Boundary find_boundary(const Mixture& m, double alpha, int dir, std::int64_t guess, std::int64_t first_step) {
  const auto in_body = [alpha](double v) { return v > alpha; };
  Walker t;              // furthest known tail point, with pmfs (may be unknown)
  bool t_known = false;
  bool t_fresh = false;  // probed since the last stepping run
  std::int64_t b_k = -1;
  double b_value = 1;
  bool b_known = false;
  if (dir > 0) {
    // Lower bound: k = -1 is a tail point (F = 0) we can step up from for
    // free; worth doing first when the bound is expected near zero.
    t_known = true;
    PerNode at_zero;
    pmf_up(m, -1, at_zero);
    t.reach = 1 + safe_reach(m, 0, dir, alpha, at_zero);
    t_fresh = guess <= kWalk;
  } else {
    // Upper bound: k = -1 is a body point (S(-1) = 1).
    b_known = true;
  }
  std::int64_t stride = std::max<std::int64_t>(first_step, 1);
  bool first_probe = true;

  for (;;) {
    // Step from a freshly probed tail point, or whenever the remaining gap
    // is shorter than a stepping run (cheaper than any probe).
    if (t_known && t.reach > 0 && (t_fresh || (b_known && (b_k - t.k) * dir <= kWalk))) {
      for (std::int64_t s = 0; s < kWalk && t.reach > 0; ++s) {
        if (b_known && t.k + dir == b_k) return {t.k, t.value, b_k, b_value, t};
        const std::int64_t from_k = t.k;
        const double from_value = t.value;
        step(m, dir, t);
        if (in_body(t.value)) return {from_k, from_value, t.k, t.value, t};
      }
      t_fresh = false;
    }
    if (t_known && b_known && t.k + dir == b_k) return {t.k, t.value, b_k, b_value, t};

    // Next probe: the guess first; while one side is unknown, gallop
    // towards it with a doubling stride; then interpolate.
    std::int64_t k;
    if (first_probe && (!t_known || (guess - t.k) * dir > 0) && (!b_known || (b_k - guess) * dir > 0)) {
      k = guess;
    } else if (!b_known) {  // only when searching up for the lower bound
      if (t.k >= kMaxCount) return {kMaxCount - 1, t.value, kMaxCount, 1.0, t};  // censored at 2^53
      k = std::min(t.k + stride, kMaxCount);
      stride = std::min(2 * stride, kMaxCount);
    } else if (!t_known) {  // only when searching up for the upper bound
      if (b_k >= kMaxCount) return {kMaxCount, 0.0, kMaxCount - 1, b_value, Walker{}};  // censored at 2^53
      k = std::min(b_k + stride, kMaxCount);
      stride = std::min(2 * stride, kMaxCount);
    } else if (t.value > 0 && b_value < 1) {
      k = interpolate(t.k, t.value, b_k, b_value, alpha, dir, t.reach > 0);
    } else {
      // One end carries no information (an underflowed 0, or the upper
      // search's starting point with S = 1): gallop from the other end.
      k = t.value > 0 ? t.k + dir * stride : b_k - dir * stride;
      stride = std::min(2 * stride, kMaxCount);
      const std::int64_t lo = std::min(t.k, b_k), hi = std::max(t.k, b_k);
      if (k <= lo || k >= hi) k = lo + (hi - lo) / 2;
    }
    first_probe = false;

    Walker probed;
    probed.k = k;
    const Probe p = probe(m, k, probed.pmf);
    probed.value = dir > 0 ? p.cdf : p.sf;
    probed.reach = safe_reach(m, k, dir, alpha, probed.pmf);
    if (in_body(probed.value)) {
      b_k = k;
      b_value = probed.value;
      b_known = true;
    } else {
      t = probed;
      t_known = true;
      t_fresh = true;
    }
  }
}

struct Guesses {
  std::int64_t lower;
  std::int64_t upper;
  std::int64_t stride;
};

// Where to start looking for each bound. Two approximations, blended by
// which source of spread dominates: Cornish-Fisher (first skewness term)
// from the mixture's first three moments, good when the count noise
// dominates; and a normal on the eta scale (the noise variance carried
// there by the delta method), good when parameter uncertainty dominates,
// where the moments of a log-link mixture are swamped by its far tail.
// Each is pushed a little outwards, so the first probe tends to land in the
// tail and stepping back towards the centre finishes the job.
Guesses guess_bounds(const Mixture& m, const Predictor& predictor, const CountNoise& noise, double z) {
  // z: P(Z > z) = alpha
  const double e = m.expected;
  double variance = m.w0 * e * e;
  double third = -m.w0 * e * e * e;
  for (std::size_t i = 0; i < static_cast<std::size_t>(m.n); ++i) {
    const double mu = m.mu[i];
    const double ratio = m.poisson ? 0 : mu / m.size[i];
    const double v = mu * (1 + ratio);
    const double k3 = mu * (1 + ratio) * (1 + 2 * ratio);
    const double d = mu - e;
    variance += m.w[i] * (v + d * d);
    third += m.w[i] * (k3 + 3 * v * d + d * d * d);
  }
  const double sd = std::sqrt(variance);
  const double skew = sd > 0 ? third / (sd * sd * sd) : 0;
  // The skewness term is only a first correction; capping it keeps a wild
  // value (a heavy right tail) from throwing the start far away.
  const double shift = std::clamp((z * z - 1) * skew / 6, -z, z);
  double lower = std::min(e + sd * (-z + shift), e);
  double upper = std::max(e + sd * (z + shift), e);

  const NoiseAt centre = noise_at(noise, mean_from_eta(noise.link, predictor.eta_mean));
  if (!centre.at_zero && centre.mu < kMaxMean && predictor.eta_variance > 0) {
    const double slope = eta_per_mu(noise.link, centre.mu);
    const double noise_variance = centre.mu * (centre.poisson ? 1 : 1 + centre.mu / centre.size) * slope * slope;
    const double total = predictor.eta_variance + noise_variance;
    const double share = predictor.eta_variance / total;
    const double spread = z * std::sqrt(total);
    const double eta_lower = mean_from_eta(noise.link, predictor.eta_mean - spread);
    const double eta_upper = mean_from_eta(noise.link, predictor.eta_mean + spread);
    lower = share * eta_lower + (1 - share) * lower;
    upper = share * eta_upper + (1 - share) * upper;
  }

  const double margin = 1 + 0.05 * sd;
  const auto to_count = [](double x) {
    if (!(x > 0)) return std::int64_t{0};
    if (x >= static_cast<double>(kMaxCount)) return kMaxCount;
    return static_cast<std::int64_t>(x);
  };
  Guesses g;
  g.lower = to_count(std::floor(lower - margin));
  g.upper = to_count(std::ceil(upper + margin));
  g.stride = std::max<std::int64_t>(kWalk, to_count(0.25 * sd));
  return g;
}

// P(Y <= observed) on m, continuing `w` (a walker of a lower-bound search
// on m) when it can step there, otherwise by one probe.
double cdf_at(const Mixture& m, Walker w, std::int64_t observed) {
  if (w.reach > 0 && w.k <= observed && observed - w.k <= std::min(kWalk, w.reach)) {
    while (w.k < observed) step(m, +1, w);
    return w.value;
  }
  PerNode pmf;
  return probe(m, observed, pmf).cdf;
}

// P(Y >= observed) = S(observed - 1) on m, observed >= 1, continuing `w` (a
// walker of an upper-bound search on m) when it can step there.
double at_least_at(const Mixture& m, Walker w, std::int64_t observed) {
  if (w.reach > 0 && w.k >= observed - 1 && w.k - (observed - 1) <= std::min(kWalk, w.reach)) {
    while (w.k > observed - 1) step(m, -1, w);
    return w.value;
  }
  PerNode pmf;
  const Probe p = probe(m, observed, pmf);
  return p.sf + mass(m, observed, pmf);
}

// Keeps each p-value on the side of alpha its bound implies. The true CDF is
// monotone, so F(observed) and S(observed - 1) lie on the same side of
// alpha as the values computed at the bounds; this only undoes rounding
// that would otherwise break the contract.
void keep_sides(const Boundary& low, const Boundary& high, std::int64_t observed, Bounds& b) {
  if (observed > b.upper) b.p_high = std::min(b.p_high, high.tail_value);
  else b.p_high = std::max(b.p_high, high.body_value);
  if (observed < b.lower) b.p_low = std::min(b.p_low, low.tail_value);
  else b.p_low = std::max(b.p_low, low.body_value);
  b.p_low = std::clamp(b.p_low, 0.0, 1.0);
  b.p_high = std::clamp(b.p_high, 0.0, 1.0);
}

// Both bounds' searches from guesses on m: the lower bound's on low_m and
// the upper's on high_m (m itself, or under the bracketing rule each side's
// own mixture). `b` holds m's expected count and the two bounds.
struct Searched {
  Boundary low;
  Boundary high;
  Bounds b;
};

Searched search_bounds(const Mixture& m, const Mixture& low_m, const Mixture& high_m, const Predictor& predictor,
                       const CountNoise& noise, double alpha, double z_alpha) {
  const Guesses guess = guess_bounds(m, predictor, noise, z_alpha);
  Searched s{find_boundary(low_m, alpha, +1, guess.lower, guess.stride),
             find_boundary(high_m, alpha, -1, guess.upper, guess.stride), Bounds{}};
  s.b.expected = m.expected;
  s.b.lower = s.low.body_k;
  s.b.upper = s.high.tail_k;
  return s;
}

// The bracketing rule: each side searched and judged on its own mixture.
Bounds bracketed_bounds(const Predictor& predictor, const CountNoise& noise, std::int64_t observed, double alpha,
                        double z_alpha, const QuadratureRule& rule, const Mixture& m) {
  Mixture low_m;
  Mixture high_m;
  bracket_mixtures(rule, m, low_m, high_m);
  Searched s = search_bounds(m, low_m, high_m, predictor, noise, alpha, z_alpha);
  const Boundary& low = s.low;
  const Boundary& high = s.high;
  Bounds& b = s.b;
  if (observed < 0) {
    b.p_low = 0;
    b.p_high = 1;
  } else {
    b.p_low = cdf_at(low_m, low.walker, observed);
    b.p_high = observed == 0 ? 1.0 : at_least_at(high_m, high.walker, observed);
  }
  keep_sides(low, high, observed, b);
  return b;
}

}  // namespace

Bounds quadrature_bounds(const Predictor& predictor, const CountNoise& noise, std::int64_t observed,
                         int nodes, double alpha, int grid_limit, double z_alpha) {
  if (std::isnan(z_alpha)) z_alpha = upper_quantile(alpha).z;
  const QuadratureRule rule = choose_rule(predictor, noise, nodes, alpha, grid_limit, z_alpha);
  Mixture m;
  build_mixture(predictor, noise, rule, m);
  if (rule.bracket) return bracketed_bounds(predictor, noise, observed, alpha, z_alpha, rule, m);
  Searched s = search_bounds(m, m, m, predictor, noise, alpha, z_alpha);
  const Boundary& low = s.low;
  const Boundary& high = s.high;
  Bounds& b = s.b;
  const double f_below_lower = low.tail_value;  // <= alpha (0 at lower == 0)
  const double s_at_upper = high.tail_value;    // <= alpha

  // p-values: F(observed) and S(observed - 1).
  if (observed < 0) {
    b.p_low = 0;
    b.p_high = 1;
  } else {
    const std::int64_t from_low = observed - low.walker.k;    // steps up to reach observed
    const std::int64_t from_high = high.walker.k - (observed - 1);  // steps down to reach observed - 1
    const bool between = observed >= b.lower && observed <= b.upper;
    const bool low_reaches = low.walker.reach > 0 && from_low <= std::min(kWalk, low.walker.reach);
    const bool high_reaches = high.walker.reach > 0 && from_high <= std::min(kWalk, high.walker.reach);
    if (between && low_reaches && (from_low <= from_high || !high_reaches)) {
      Walker w = low.walker;
      double previous = w.k == b.lower ? f_below_lower : w.value;
      while (w.k < observed) {
        previous = w.value;
        step(m, +1, w);
      }
      b.p_low = w.value;
      b.p_high = 1 - previous;
    } else if (between && high_reaches) {
      Walker w = high.walker;
      double s_observed = w.k == b.upper ? w.value : s_at_upper;  // walker at upper or upper - 1
      while (w.k > observed - 1) {
        if (w.k == observed) s_observed = w.value;
        step(m, -1, w);
      }
      b.p_low = 1 - s_observed;
      b.p_high = w.value;
    } else {
      PerNode pmf;
      const Probe p = probe(m, observed, pmf);
      b.p_low = p.cdf;
      b.p_high = p.sf + mass(m, observed, pmf);
    }
    if (observed == 0) b.p_high = 1;
  }

  keep_sides(low, high, observed, b);
  return b;
}

}  // namespace tallyd::bounds
