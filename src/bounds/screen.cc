#include "bounds/screen.h"

#include <algorithm>
#include <array>
#include <cmath>
#include <limits>
#include <mutex>
#include <optional>

#include "bounds/count_noise.h"
#include "bounds/mixture.h"
#include "bounds/tail_floor.h"

namespace tallyd::bounds {

double binomial_low_tail_bound(double alpha, double p, int draws) {
  if (!(p > alpha) || draws <= 0) return 1;
  if (p >= 1) return 0;
  // KL(alpha || p) of two Bernoulli laws, in nats.
  const double kl = alpha * std::log(alpha / p) + (1 - alpha) * std::log1p(-alpha) - (1 - alpha) * std::log1p(-p);
  return std::exp(-static_cast<double>(draws) * std::max(kl, 0.0));
}

namespace {

// Stage 2 of the quadrature screen splits each side's components into bands
// at these distances from eta_mean, in sd(eta*).
constexpr double kBandEdges[kScreenBands - 1] = {1.0, 2.0};

// One walk over the rule's nodes: what the screen needs of the mixture,
// summed in the order build_mixture sums it (so `expected` is bit for bit
// the built mixture's: the components pooled at zero have the smallest eta,
// so they come first in both sums; or both take lognormal_expected).
struct Walk {
  double expected = 0;
  double w_up = 0;   // components with mu >= mu_c (all, when mu_c is at zero)
  double w_low = 0;  // components with mu <= mu_c, those at zero included
  // Stage 2: band b >= 1 of the high side holds the components from the
  // first node at or beyond eta_mean + kBandEdges[b - 1] sd (its
  // representative, the band's smallest mean) up to the next edge; band 0
  // the rest of W_up. The low side mirrors it below eta_mean, each band's
  // representative being its largest mean.
  double high_band[kScreenBands] = {};
  double low_band[kScreenBands] = {};
  double high_rep[kScreenBands] = {};  // eta of band b's representative (b >= 1)
  double low_rep[kScreenBands] = {};
  bool high_seen[kScreenBands] = {};
  bool low_seen[kScreenBands] = {};
};

// The walk over a Gauss-Hermite rule's nodes when a node's side of eta_mean
// and its band are read from its eta (the log link with no mean clamped):
// eta_i = eta_mean + sqrt(2 v) x_i lies at or above eta_mean + e sd(eta*)
// exactly when sqrt(2) x_i >= e, whatever the predictor. So the walk's sums,
// taken over the nodes in the same order, are the rule's own, computed once
// per node count; a record then only places its bands' representatives.
// That holds while rounding cannot move a node across an edge: `gap` is the
// smallest distance, in sd(eta*), of a node from an edge it is compared
// with (0 for the side test of a node off 0, 1 and 2 for the bands).
struct RuleWalk {
  Walk sums;  // w_up, w_low, the band weights and seen flags; rep unset
  std::array<int, kScreenBands> high_rep_node{};  // node index of band b's representative (b >= 1)
  std::array<int, kScreenBands> low_rep_node{};
  double gap = 0;    // usable only when > 0
  double widest = 0;  // largest |sqrt(2) x_i|
};

RuleWalk build_rule_walk(const HermiteRule& hermite) {
  RuleWalk r;
  Walk& w = r.sums;
  double gap = std::numeric_limits<double>::infinity();
  for (std::size_t i = 0; i < hermite.nodes.size(); ++i) {
    const double z = std::sqrt(2.0) * hermite.nodes[i];  // the node in sd(eta*)
    const double weight = hermite.normalised[i];
    r.widest = std::max(r.widest, std::abs(z));
    if (z != 0) gap = std::min(gap, std::abs(z));
    for (const double edge : kBandEdges) gap = std::min(gap, std::abs(std::abs(z) - edge));
    if (z >= 0) {
      w.w_up += weight;
      int b = 0;
      while (b + 1 < kScreenBands && z >= kBandEdges[b]) ++b;
      if (b > 0 && !w.high_seen[b]) {
        w.high_seen[b] = true;
        r.high_rep_node[static_cast<std::size_t>(b)] = static_cast<int>(i);
      }
      w.high_band[b] += weight;
    }
    if (z <= 0) {
      w.w_low += weight;
      int b = 0;
      while (b + 1 < kScreenBands && z <= -kBandEdges[b]) ++b;
      if (b > 0) {
        w.low_seen[b] = true;
        r.low_rep_node[static_cast<std::size_t>(b)] = static_cast<int>(i);
      }
      w.low_band[b] += weight;
    }
  }
  // sqrt(2) x_i above carries a rounding of its own (~2e-16 relative).
  r.gap = gap - 1e-14 * (1 + r.widest);
  return r;
}

// The rule walk for n nodes, built once per n like the rule itself
// (gauss_hermite.h); immutable once built, thread-safe.
const RuleWalk& rule_walk(int n) {
  n = std::clamp(n, 1, kMaxHermiteNodes);
  static std::array<std::once_flag, kMaxHermiteNodes + 1> built;
  static std::array<RuleWalk, kMaxHermiteNodes + 1> walks;
  const auto slot = static_cast<std::size_t>(n);
  std::call_once(built[slot], [&] { walks[slot] = build_rule_walk(gauss_hermite(n)); });
  return walks[slot];
}

// The walk of `predictor` from its rule's sums, when rounding provably
// leaves every node on the side and in the band the exact comparison puts
// it: each eta carries at most a few ulps of eta_mean's magnitude plus a few
// 1e-16 of sd(eta*) times the node's reach, far inside gap * sd(eta*).
std::optional<Walk> walk_from_rule(const Predictor& predictor, const QuadratureRule& rule) {
  if (rule.grid || !(predictor.eta_variance > 0)) return std::nullopt;
  const RuleWalk& r = rule_walk(rule.hermite_nodes);
  const double sd = std::sqrt(predictor.eta_variance);
  if (!(r.gap > 0) || !(sd * r.gap > 0x1p-46 * (std::abs(predictor.eta_mean) + sd * (2 * r.widest + 4))) ||
      !(sd * r.gap > std::numeric_limits<double>::min())) {
    return std::nullopt;
  }
  Walk w = r.sums;
  // Each representative's eta as for_each_node computes it (mixture.h).
  const HermiteRule& hermite = gauss_hermite(rule.hermite_nodes);
  const double scale = std::sqrt(2 * predictor.eta_variance);
  const auto eta_of = [&](int node) {
    return predictor.eta_mean + scale * hermite.nodes[static_cast<std::size_t>(node)];
  };
  for (int b = 1; b < kScreenBands; ++b) {
    const auto i = static_cast<std::size_t>(b);
    if (w.high_seen[b]) w.high_rep[b] = eta_of(r.high_rep_node[i]);
    if (w.low_seen[b]) w.low_rep[b] = eta_of(r.low_rep_node[i]);
  }
  return w;
}

Walk walk_nodes(const Predictor& predictor, const CountNoise& noise, const QuadratureRule& rule, const NoiseAt& centre) {
  const std::optional<double> closed = lognormal_expected(predictor, noise, rule);
  if (closed) {
    if (std::optional<Walk> from_rule = walk_from_rule(predictor, rule)) {
      from_rule->expected = *closed;
      return *from_rule;
    }
  }
  Walk w;
  const double sd = std::sqrt(predictor.eta_variance);
  // The log link with no node's mean clamped: `expected` in closed form, and
  // a node's side of mu_c read from its eta, no exp per node. exp is
  // increasing, so eta >= eta_mean gives mu >= mu_c up to exp's rounding
  // (below 1e-15 relative), which kScreenMargin covers.
  if (closed) w.expected = *closed;
  for_each_node(predictor, rule, [&](double weight, double eta) {
    bool up = false;
    bool low = false;
    if (closed) {
      up = eta >= predictor.eta_mean;
      low = eta <= predictor.eta_mean;
    } else {
      // noise_at's at_zero and mu, without the NB2 size it would also work out.
      const double raw = mean_from_eta(noise.link, eta);
      const bool at_zero = !(raw > kMinMean);
      const double mu = std::min(raw, kMaxMean);
      if (!at_zero) w.expected += weight * mu;
      up = centre.at_zero || (!at_zero && mu >= centre.mu);
      low = at_zero || (!centre.at_zero && mu <= centre.mu);
    }
    if (up) {
      w.w_up += weight;
      int b = 0;
      while (sd > 0 && b + 1 < kScreenBands && eta >= predictor.eta_mean + kBandEdges[b] * sd) ++b;
      if (b > 0 && !w.high_seen[b]) {
        w.high_seen[b] = true;
        w.high_rep[b] = eta;
      }
      w.high_band[b] += weight;
    }
    if (low) {
      w.w_low += weight;
      int b = 0;
      while (sd > 0 && b + 1 < kScreenBands && eta <= predictor.eta_mean - kBandEdges[b] * sd) ++b;
      if (b > 0) {  // ascending eta: the last node seen in the band is its largest
        w.low_seen[b] = true;
        w.low_rep[b] = eta;
      }
      w.low_band[b] += weight;
    }
  });
  return w;
}

// P(Y >= k) from a component's tails.
double at_least(const Tails& t, std::int64_t k) { return k == 0 ? 1.0 : std::min(t.sf + t.pmf, 1.0); }

// A stage-2 floor on one side: the sum over bands of the band's weight times
// the tail towards `observed` (P(Y >= observed) when `high`, else
// P(Y <= observed)) at the band's representative; band 0's representative is
// the centre, whose tails are `t`. rep_eta(b) is band b's eta (b >= 1),
// present(b) whether band b holds any weight.
template <class RepEta, class Present>
double band_floor(bool high, const double* weight, RepEta rep_eta, Present present, const CountNoise& noise,
                  const Tails& t, std::int64_t observed) {
  const auto tail = [&](const Tails& x) { return high ? at_least(x, observed) : std::min(x.cdf, 1.0); };
  double floor = weight[0] * tail(t);
  for (int b = 1; b < kScreenBands; ++b) {
    if (!present(b)) continue;
    floor += weight[b] * tail(tails_at(noise_at(noise, mean_from_eta(noise.link, rep_eta(b))), observed));
  }
  return floor;
}

// The Gaussian probability of each band of eta* on one side, band b being
// [edge[b], edge[b + 1]) sd from eta_mean (edge[0] = 0, the last band open):
// constants of kBandEdges, computed once.
struct GaussianBands {
  double edge[kScreenBands] = {0};
  double probability[kScreenBands] = {};
};

const GaussianBands& gaussian_bands() {
  static const GaussianBands bands = [] {
    GaussianBands g;
    for (int b = 1; b < kScreenBands; ++b) g.edge[b] = kBandEdges[b - 1];
    for (int b = 0; b < kScreenBands; ++b) {
      const double outer = b + 1 < kScreenBands ? 0.5 * std::erfc(g.edge[b + 1] / std::sqrt(2.0)) : 0.0;
      g.probability[b] = 0.5 * std::erfc(g.edge[b] / std::sqrt(2.0)) - outer;
    }
    return g;
  }();
  return bands;
}

bool settles_draws(double alpha, double p, int draws) {
  return binomial_low_tail_bound(alpha, p, draws) <= kSimulateScreenRisk;
}

// Stage 0: the floors W_up * tail_floor(mu_c).at_least and
// W_low * tail_floor(mu_c).at_most, no special function. Settles the record
// (filling `out`) only when both floors clear alpha as stage 1 would and
// also exceed `wanted`; otherwise stage 1 runs as if this one had not, so
// what the caller sees of an unsettled record is unchanged.
bool settle_without_tails(double w_up, double w_low, const NoiseAt& centre, std::int64_t observed, double alpha,
                          int draws, double wanted, ScreenOutcome& out) {
  const double needed = alpha * (1 + kScreenMargin);
  if (draws > 0) {
    // The draws estimate the true mixture (weight 1/2 each side); aim at
    // kSimulateAim * alpha, far enough above alpha for the Chernoff test
    // with the default draws (checked below with the real test).
    w_up = std::min(w_up, 0.5);
    w_low = std::min(w_low, 0.5);
  }
  const double goal = std::max({needed, wanted, draws > 0 ? kSimulateAim * alpha : 0.0});
  if (!(w_up > 0 && w_low > 0 && goal < 1)) return false;
  const TailFloor f = tail_floor(centre, observed, goal / std::min(w_up, w_low));
  double high = w_up * f.at_least;
  double low = w_low * f.at_most;
  if (draws > 0) {
    high *= 1 - kScreenMargin;
    low *= 1 - kScreenMargin;
    if (!settles_draws(alpha, high, draws) || !settles_draws(alpha, low, draws)) return false;
  }
  if (!(high > needed && low > needed && high > wanted && low > wanted)) return false;
  out.settled = true;
  out.stage = 0;
  out.p_high_floor = high;
  out.p_low_floor = low;
  return true;
}

}  // namespace

ScreenOutcome screen_record(const Predictor& predictor, const CountNoise& noise, std::int64_t observed,
                            int nodes, double alpha, int draws, double wanted, int grid_limit, double z_alpha) {
  ScreenOutcome out;
  const QuadratureRule rule = choose_rule(predictor, noise, nodes, alpha, grid_limit, z_alpha);
  const NoiseAt centre = noise_at(noise, mean_from_eta(noise.link, predictor.eta_mean));
  Walk w = walk_nodes(predictor, noise, rule, centre);
  if (rule.bracket) {
    // The full search reports the bracketing mixtures' tails, which bound
    // the true mixture's from above; the true mixture has exactly 1/2 on
    // each side of eta_mean (its dropped mass is far inside kScreenMargin).
    w.w_up = std::min(w.w_up, 0.5);
    w.w_low = std::min(w.w_low, 0.5);
  }
  out.expected = w.expected;
  if (observed < 0) return out;  // p_low = 0: leave it to the full evaluation

  if (settle_without_tails(w.w_up, w.w_low, centre, observed, alpha, draws, wanted, out)) return out;

  const Tails t = tails_at(centre, observed);
  out.p_high_floor = w.w_up * at_least(t, observed);
  out.p_low_floor = w.w_low * std::min(t.cdf, 1.0);
  if (!std::isfinite(out.p_high_floor) || !std::isfinite(out.p_low_floor)) return out;

  if (draws <= 0) {
    const double needed = alpha * (1 + kScreenMargin);
    out.stage = 1;
    out.settled = out.p_high_floor > needed && out.p_low_floor > needed;
    if (out.settled) return out;
    // Stage 2: one more tail per band on each side still short of alpha.
    // Every component of a band has a mean on the far side of its
    // representative's, so its tail towards `observed` is at least the
    // representative's (the same monotonicity as above); the bands
    // partition W_up (W_low), so the sum is a tighter floor.
    out.stage = 2;
    const double sd = std::sqrt(predictor.eta_variance);
    const GaussianBands& g = gaussian_bands();
    const auto every = [](int) { return true; };
    if (!(out.p_high_floor > needed)) {
      const double floor =
          rule.bracket
              ? band_floor(true, g.probability, [&](int b) { return predictor.eta_mean + g.edge[b] * sd; }, every, noise,
                           t, observed)
              : band_floor(true, w.high_band, [&](int b) { return w.high_rep[b]; },
                           [&](int b) { return w.high_seen[b]; }, noise, t, observed);
      if (std::isfinite(floor)) out.p_high_floor = std::max(out.p_high_floor, floor);
    }
    if (!(out.p_low_floor > needed)) {
      const double floor =
          rule.bracket
              ? band_floor(false, g.probability, [&](int b) { return predictor.eta_mean - g.edge[b] * sd; }, every,
                           noise, t, observed)
              : band_floor(false, w.low_band, [&](int b) { return w.low_rep[b]; },
                           [&](int b) { return w.low_seen[b]; }, noise, t, observed);
      if (std::isfinite(floor)) out.p_low_floor = std::max(out.p_low_floor, floor);
    }
    out.settled = out.p_high_floor > needed && out.p_low_floor > needed;
  } else {
    // The draws estimate the true mixture, whose weights above and below
    // mu_c are exactly 1/2; the quadrature weights are that up to rounding,
    // so take the smaller.
    double high = std::min(out.p_high_floor, 0.5 * at_least(t, observed)) * (1 - kScreenMargin);
    double low = std::min(out.p_low_floor, 0.5 * std::min(t.cdf, 1.0)) * (1 - kScreenMargin);
    const auto settles = [&](double p) { return settles_draws(alpha, p, draws); };
    out.stage = 1;
    const double sd = std::sqrt(predictor.eta_variance);
    if ((!settles(high) || !settles(low)) && sd > 0) {
      // Stage 2 for the true mixture: eta* ~ N(eta_mean, sd^2) falls in
      // [eta_mean + e_b sd, eta_mean + e_{b+1} sd) with the Gaussian
      // probability of that band, and the tail towards `observed` is at
      // least its value at the band's inner edge.
      out.stage = 2;
      const GaussianBands& g = gaussian_bands();
      const auto every = [](int) { return true; };
      if (!settles(high)) {
        const double floor = band_floor(
            true, g.probability, [&](int b) { return predictor.eta_mean + g.edge[b] * sd; }, every, noise, t, observed);
        if (std::isfinite(floor)) high = std::max(high, floor * (1 - kScreenMargin));
      }
      if (!settles(low)) {
        const double floor = band_floor(
            false, g.probability, [&](int b) { return predictor.eta_mean - g.edge[b] * sd; }, every, noise, t, observed);
        if (std::isfinite(floor)) low = std::max(low, floor * (1 - kScreenMargin));
      }
    }
    // Stage 2's floors bound the true mixture's p-values (those the draws
    // estimate); report the larger, so a settled record's floors are above alpha.
    out.p_high_floor = std::max(out.p_high_floor, high);
    out.p_low_floor = std::max(out.p_low_floor, low);
    out.settled = settles(high) && settles(low);
  }
  return out;
}

}  // namespace tallyd::bounds
