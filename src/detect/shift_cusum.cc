#include "detect/shift_cusum.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <vector>

#include <Eigen/Dense>

#include "core/log_gamma.h"

namespace tallyd::detect {
namespace {

constexpr double kGridStep = 0.1;  // log-scale cell of the limit cache's mean and dispersion index (about 10%)
constexpr int kTableStates = 100;  // chain cells for cached limits (the cost is cubic in it)

// log P(Y = y) under the law.
double log_pmf(std::int64_t y, const CountLaw& law) {
  const double k = static_cast<double>(y);
  if (law.poisson()) return k * std::log(law.mean) - law.mean - log_gamma(k + 1);
  const double r = law.size;
  return log_gamma(k + r) - log_gamma(r) - log_gamma(k + 1) + r * std::log(r / (r + law.mean)) +
         k * std::log(law.mean / (r + law.mean));
}

// Counts beyond this carry negligible in-control probability (over 12 sd above the mean).
std::int64_t count_ceiling(const CountLaw& law) {
  const double var = law.poisson() ? law.mean : law.mean + law.mean * law.mean / law.size;
  return static_cast<std::int64_t>(std::ceil(law.mean + 12 * std::sqrt(var) + 20));
}

}  // namespace

bool CountLaw::poisson() const { return !(std::isfinite(size) && size > 0); }

double shift_increment(std::int64_t y, const CountLaw& law, double factor) {
  const double k = static_cast<double>(y);
  const double mu = law.mean;
  if (law.poisson()) return k * std::log(factor) - mu * (factor - 1);
  const double r = law.size;
  return k * std::log(factor * (r + mu) / (r + factor * mu)) + r * std::log((r + mu) / (r + factor * mu));
}

namespace {

// Probabilists' Gauss-Hermite rule with 5 nodes for E[f(Z)], Z ~ N(0, 1):
// nodes 0, +-sqrt(5 - sqrt(10)), +-sqrt(5 + sqrt(10)); weights 8/15,
// (7 + 2 sqrt(10)) / 60, (7 - 2 sqrt(10)) / 60 (the n = 5 rule of Abramowitz
// and Stegun 1964, 25.4.46 and Table 25.10, rescaled from exp(-x^2) to N(0, 1)).
constexpr double kNodes[5] = {0.0, 1.3556261799742659, -1.3556261799742659, 2.8569700138728056,
                              -2.8569700138728056};
constexpr double kWeights[5] = {0.5333333333333333, 0.22207592200561265, 0.22207592200561265,
                                0.011257411327720689, 0.011257411327720689};

// The 3-node rule for E[f(Z)], Z ~ N(0, 1): nodes 0, +-sqrt(3), weights 2/3,
// 1/6, 1/6 (Abramowitz and Stegun 1964, Table 25.10, n = 3, rescaled).
constexpr double kNodes3[3] = {0.0, 1.7320508075688772, -1.7320508075688772};
constexpr double kWeights3[3] = {0.6666666666666667, 0.16666666666666667, 0.16666666666666667};

// The true count law at mean m for the noise of `in`.
CountLaw noise_at(const InControl& in, double m) {
  if (std::isfinite(in.theta) && in.theta > 0) return {m, in.theta};
  if (std::isfinite(in.phi) && in.phi > 1) return {m, m / (in.phi - 1)};
  return {m, 0};
}

// The Brook-Evans chain of one CUSUM: increments scored against one law,
// counts drawn from a weighted set of true laws. The pmfs and increments do
// not depend on h, so they are computed once and reused through a bisection.
class Chain {
 public:
  // With `mix` the truths are one law, their weighted mixture (an error drawn
  // afresh each record); without, separate chains whose alarm rates are averaged.
  Chain(const CountLaw& scored, double factor, const std::vector<std::pair<double, CountLaw>>& truths,
        bool mix = false) {
    std::int64_t ymax = 0;
    for (const auto& [weight, law] : truths) {
      Component c;
      c.weight = weight;
      const std::int64_t top = count_ceiling(law);
      ymax = std::max(ymax, top);
      c.pmf.resize(static_cast<std::size_t>(top + 1));
      for (std::int64_t y = 0; y <= top; ++y) c.pmf[static_cast<std::size_t>(y)] = std::exp(log_pmf(y, law));
      components_.push_back(std::move(c));
    }
    if (mix && components_.size() > 1) {
      Component m;
      m.pmf.assign(static_cast<std::size_t>(ymax + 1), 0.0);
      for (const Component& c : components_)
        for (std::size_t y = 0; y < c.pmf.size(); ++y) m.pmf[y] += c.weight * c.pmf[y];
      components_.assign(1, std::move(m));
    }
    step_.resize(static_cast<std::size_t>(ymax + 1));
    for (std::int64_t y = 0; y <= ymax; ++y) step_[static_cast<std::size_t>(y)] = shift_increment(y, scored, factor);
  }

  // Components that are themselves mixtures: each part's laws are mixed into
  // one law per record (weights within a part sum to 1), the parts' alarm
  // rates averaged with their weights.
  struct Part {
    double weight;
    std::vector<std::pair<double, CountLaw>> laws;
  };
  Chain(const CountLaw& scored, double factor, const std::vector<Part>& parts) {
    std::int64_t ymax = 0;
    for (const Part& part : parts) {
      Component c;
      c.weight = part.weight;
      for (const auto& [weight, law] : part.laws) {
        const std::int64_t top = count_ceiling(law);
        ymax = std::max(ymax, top);
        if (c.pmf.size() < static_cast<std::size_t>(top + 1)) c.pmf.resize(static_cast<std::size_t>(top + 1), 0.0);
        for (std::int64_t y = 0; y <= top; ++y) c.pmf[static_cast<std::size_t>(y)] += weight * std::exp(log_pmf(y, law));
      }
      components_.push_back(std::move(c));
    }
    step_.resize(static_cast<std::size_t>(ymax + 1));
    for (std::int64_t y = 0; y <= ymax; ++y) step_[static_cast<std::size_t>(y)] = shift_increment(y, scored, factor);
  }

  // 1 / (sum_i weight_i / ARL_i); +inf when no component reaches h.
  double arl(double h, int states) const {
    double rate = 0;
    for (const Component& c : components_) {
      const double a = component_arl(c.pmf, h, states);
      if (std::isfinite(a)) rate += c.weight / a;
    }
    return rate > 0 ? 1 / rate : std::numeric_limits<double>::infinity();
  }

 private:
  struct Component {
    double weight = 1;
    std::vector<double> pmf;
  };
  // Solver workspace reused by component_arl (a Chain is used by one thread).
  mutable Eigen::MatrixXd workspace_;
  mutable Eigen::PartialPivLU<Eigen::MatrixXd> lu_;
  mutable Eigen::VectorXd ones_, arl_;

  double component_arl(const std::vector<double>& pmf, double h, int states) const {
    const int n = std::max(states, 10);
    // Cell j holds S near j * w; cell 0 also holds S <= w / 2 (the reflecting
    // barrier at 0); the last cell ends exactly at h (Brook and Evans 1972).
    const double w = h / (n - 0.5);
    // I - R, in a workspace kept across the bisection's calls: a fresh
    // n x n matrix and LU per call (180 KiB at n = 150) made the allocator
    // grow and trim the heap each time, and those system calls (with their
    // TLB flushes) took more time than the solves.
    Eigen::MatrixXd& A = workspace_;
    A.setIdentity(n, n);
    for (int j = 0; j < n; ++j) {
      const double from = j * w;
      for (std::size_t y = 0; y < pmf.size(); ++y) {
        const double s = from + step_[y];
        if (s > h) continue;  // absorbed: an alarm
        const int cell = s <= 0.5 * w ? 0 : std::min(n - 1, static_cast<int>(std::ceil(s / w - 0.5)));
        A(j, cell) -= pmf[y];
      }
    }
    lu_.compute(A);
    ones_.setOnes(n);
    arl_ = lu_.solve(ones_);
    const double a = arl_(0);
    // A chain that never reaches h makes I - R singular: the solve then gives
    // huge or non-finite values.
    if (!std::isfinite(a) || a < 1 || a > 1e15) return std::numeric_limits<double>::infinity();
    return a;
  }

  std::vector<Component> components_;
  std::vector<double> step_;
};

Chain known_chain(const CountLaw& law, double factor) { return Chain(law, factor, {{1.0, law}}); }

Chain fitted_chain(const InControl& in, double factor, ShiftError error) {
  const CountLaw scored = scored_law(in);
  const double v = std::isfinite(in.eta_variance) ? std::max(in.eta_variance, 0.0) : 0.0;
  // The mean's error: node weights and log-scale offsets (exp(delta - v / 2)
  // keeps the mixture's mean at the predictive mean).
  std::vector<std::pair<double, double>> mean_nodes;
  if (v <= 0) mean_nodes.push_back({1.0, 0.0});
  else
    for (int i = 0; i < 5; ++i) mean_nodes.push_back({kWeights[i], std::sqrt(v) * kNodes[i] - 0.5 * v});
  std::vector<std::pair<double, CountLaw>> truths;
  if (error == ShiftError::held) {
    for (const auto& [w, d] : mean_nodes) truths.push_back({w, noise_at(in, in.mean * std::exp(d))});
    return Chain(scored, factor, truths, false);
  }
  const bool phi_error = std::isfinite(in.phi) && in.phi > 1 && std::isfinite(in.dispersion_df) && in.dispersion_df > 0;
  if (!phi_error) {
    for (const auto& [w, d] : mean_nodes) truths.push_back({w, noise_at(in, in.mean * std::exp(d))});
    return Chain(scored, factor, truths, true);
  }
  // One chain per node of phi's error (held over a run), each with the mean's
  // error mixed into every record's law (fresh); alarm rates averaged.
  const double s = std::sqrt(2 / std::max(in.dispersion_df, 2.0));
  std::vector<Chain::Part> parts;
  for (int j = 0; j < 3; ++j) {
    InControl node = in;
    node.phi = in.phi * std::exp(s * kNodes3[j] + 0.5 * s * s);
    std::vector<std::pair<double, CountLaw>> mix;
    for (const auto& [w, d] : mean_nodes) mix.push_back({w, noise_at(node, in.mean * std::exp(d))});
    parts.push_back({kWeights3[j], std::move(mix)});
  }
  return Chain(scored, factor, parts);
}

double limit_from(const Chain& chain, double arl0, int states) {
  double lo = 0, hi = 1;
  while (chain.arl(hi, states) < arl0 && hi < 1e3) {
    lo = hi;
    hi *= 2;
  }
  // Bisection to 1e-3 of h. The ARL of a count CUSUM is a step function of
  // h (the statistic lives near a lattice), so a target between two steps
  // cannot be met exactly: of the two limits either side of the step, keep
  // the one whose ARL is nearer the target on the log scale.
  double arl_lo = chain.arl(lo, states);
  double arl_hi = chain.arl(hi, states);
  for (int i = 0; i < 60 && hi - lo > 1e-3 * hi; ++i) {
    const double mid = 0.5 * (lo + hi);
    const double arl_mid = chain.arl(mid, states);
    if (arl_mid < arl0) {
      lo = mid;
      arl_lo = arl_mid;
    } else {
      hi = mid;
      arl_hi = arl_mid;
    }
  }
  if (lo > 0 && std::abs(std::log(arl_lo / arl0)) < std::abs(std::log(arl_hi / arl0))) return lo;
  return hi;
}

constexpr double kVarianceStep = 0.5;   // log-scale cell of eta_variance in the limit cache
constexpr double kVarianceFloor = 1e-5; // below this the estimation error is ignored
constexpr double kDfCeiling = 2000;     // above this phi counts as known

// The noise's dispersion index Var / mean at mean m (1 for Poisson).
double noise_index(const InControl& in, double m) {
  if (std::isfinite(in.theta) && in.theta > 0) return 1 + m / in.theta;
  if (std::isfinite(in.phi) && in.phi > 1) return in.phi;
  return 1;
}

}  // namespace

CountLaw scored_law(const InControl& in) {
  const double mu = std::max(in.mean, 1e-6);
  double variance = mu * noise_index(in, mu);
  const double v = in.eta_variance;
  if (std::isfinite(v) && v > 0) variance += mu * mu * std::expm1(std::min(v, 5.0));
  CountLaw law{mu, 0};
  if (variance > mu * (1 + 1e-9)) law.size = mu * mu / (variance - mu);
  return law;
}

double chain_arl(const CountLaw& law, double factor, double h, int states) {
  return known_chain(law, factor).arl(h, states);
}

double chain_arl(const InControl& in, double factor, double h, int states, ShiftError error) {
  return fitted_chain(in, factor, error).arl(h, states);
}

double decision_limit(const CountLaw& law, double factor, double arl0, int states) {
  return limit_from(known_chain(law, factor), arl0, states);
}

double decision_limit(const InControl& in, double factor, double arl0, int states, ShiftError error) {
  return limit_from(fitted_chain(in, factor, error), arl0, states);
}

InControl LimitTable::rounded(const InControl& in) {
  const double mean = std::clamp(in.mean, 1e-3, 1e5);
  const double mean_r = std::exp(kGridStep * static_cast<double>(std::lround(std::log(mean) / kGridStep)));
  InControl out;
  out.mean = mean_r;
  const long index_cell = std::lround(std::log(noise_index(in, mean)) / kGridStep);
  if (index_cell > 0) {
    const double index_r = std::exp(kGridStep * static_cast<double>(index_cell));
    if (std::isfinite(in.theta) && in.theta > 0) out.theta = mean_r / (index_r - 1);
    else out.phi = index_r;
  }
  if (std::isfinite(in.dispersion_df) && in.dispersion_df > 0 && in.dispersion_df <= kDfCeiling)
    out.dispersion_df = std::exp(kVarianceStep * static_cast<double>(std::lround(std::log(std::max(in.dispersion_df, 2.0)) / kVarianceStep)));
  if (std::isfinite(in.eta_variance) && in.eta_variance >= kVarianceFloor)
    out.eta_variance = std::exp(kVarianceStep * static_cast<double>(std::lround(std::log(in.eta_variance) / kVarianceStep)));
  return out;
}

double LimitTable::limit(const InControl& in, double factor, double arl0, ShiftError error) {
  const InControl r = rounded(in);
  const long mean_cell = std::lround(std::log(r.mean) / kGridStep);
  const int kind = std::isfinite(r.theta) && r.theta > 0 ? 1 : (r.phi > 1 ? 2 : 0);
  const long index_cell = std::lround(std::log(noise_index(r, r.mean)) / kGridStep);
  const long variance_cell = r.eta_variance > 0 ? std::lround(std::log(r.eta_variance) / kVarianceStep) : -1000;
  // Without an estimation error both allowances are the same chain.
  const int allowance = variance_cell == -1000 ? 0 : static_cast<int>(error) + 1;
  // phi's error enters only the fresh chain of a quasi-Poisson noise.
  const long df_cell = kind == 2 && error == ShiftError::fresh && r.dispersion_df > 0
                           ? std::lround(std::log(r.dispersion_df) / kVarianceStep)
                           : -1000;
  const auto key = std::make_tuple(mean_cell, kind, index_cell, variance_cell, factor, arl0, allowance, df_cell);
  auto it = cache_.find(key);
  if (it != cache_.end()) return it->second;
  const double h = decision_limit(r, factor, arl0, kTableStates, error);
  cache_.emplace(key, h);
  return h;
}

double LimitTable::limit(const CountLaw& law, double factor, double arl0) {
  InControl in;
  in.mean = law.mean;
  if (!law.poisson()) in.theta = law.size;
  return limit(in, factor, arl0);
}

}  // namespace tallyd::detect
