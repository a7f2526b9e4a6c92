#include "bounds/screen.h"

#include <algorithm>
#include <cmath>

#include "bounds/count_noise.h"
#include "bounds/mixture.h"

namespace tallyd::bounds {

double binomial_low_tail_bound(double alpha, double p, int draws) {
  if (!(p > alpha) || draws <= 0) return 1;
  if (p >= 1) return 0;
  // KL(alpha || p) of two Bernoulli laws, in nats.
  const double kl = alpha * std::log(alpha / p) + (1 - alpha) * std::log1p(-alpha) - (1 - alpha) * std::log1p(-p);
  return std::exp(-static_cast<double>(draws) * std::max(kl, 0.0));
}

ScreenOutcome screen_record(const Predictor& predictor, const CountNoise& noise, std::int64_t observed,
                            int nodes, double alpha, int draws) {
  ScreenOutcome out;
  // The same mixture quadrature_bounds builds, so `expected` is identical
  // to what it reports and the weights below are those it sums over.
  Mixture m;
  build_mixture(predictor, noise, choose_rule(predictor, noise, nodes, alpha), m);
  out.expected = m.expected;
  if (observed < 0) return out;  // p_low = 0: leave it to the full evaluation

  const NoiseAt centre = noise_at(noise, mean_from_eta(noise.link, predictor.eta_mean));
  double w_up = 0;
  double w_low = m.w0;  // components at zero have mu = 0 <= mu_c
  if (centre.at_zero) w_up = m.w0;  // mu_c = 0 too: every component is >= it
  for (std::size_t i = 0; i < static_cast<std::size_t>(m.n); ++i) {
    if (centre.at_zero || m.mu[i] >= centre.mu) w_up += m.w[i];
    if (!centre.at_zero && m.mu[i] <= centre.mu) w_low += m.w[i];
  }
  const Tails t = tails_at(centre, observed);
  const double at_least = observed == 0 ? 1.0 : t.sf + t.pmf;
  out.p_high_floor = w_up * std::min(at_least, 1.0);
  out.p_low_floor = w_low * std::min(t.cdf, 1.0);
  if (!std::isfinite(out.p_high_floor) || !std::isfinite(out.p_low_floor)) return out;

  if (draws <= 0) {
    const double needed = alpha * (1 + kScreenMargin);
    out.settled = out.p_high_floor > needed && out.p_low_floor > needed;
  } else {
    // The draws estimate the true mixture, whose weights above and below
    // mu_c are exactly 1/2; the quadrature weights are that up to rounding,
    // so take the smaller.
    const double high = std::min(out.p_high_floor, 0.5 * std::min(at_least, 1.0)) * (1 - kScreenMargin);
    const double low = std::min(out.p_low_floor, 0.5 * std::min(t.cdf, 1.0)) * (1 - kScreenMargin);
    out.settled = binomial_low_tail_bound(alpha, high, draws) <= kSimulateScreenRisk &&
                  binomial_low_tail_bound(alpha, low, draws) <= kSimulateScreenRisk;
  }
  return out;
}

}  // namespace tallyd::bounds
