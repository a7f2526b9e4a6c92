#include "detect/shift_cusum.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <vector>

#include <Eigen/Dense>

namespace tallyd::detect {
namespace {

constexpr double kGridStep = 0.05;  // log-scale cell of the limit cache (about 5%)

// log P(Y = y) under the law.
double log_pmf(std::int64_t y, const CountLaw& law) {
  const double k = static_cast<double>(y);
  if (law.poisson()) return k * std::log(law.mean) - law.mean - std::lgamma(k + 1);
  const double r = law.size;
  return std::lgamma(k + r) - std::lgamma(r) - std::lgamma(k + 1) + r * std::log(r / (r + law.mean)) +
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

double chain_arl(const CountLaw& law, double factor, double h, int states) {
  const int n = std::max(states, 10);
  // Cell j holds S near j * w; cell 0 also holds S <= w / 2 (the reflecting
  // barrier at 0); the last cell ends exactly at h (Brook and Evans 1972).
  const double w = h / (n - 0.5);
  const std::int64_t ymax = count_ceiling(law);
  std::vector<double> pmf(static_cast<std::size_t>(ymax + 1)), step(pmf.size());
  for (std::int64_t y = 0; y <= ymax; ++y) {
    pmf[static_cast<std::size_t>(y)] = std::exp(log_pmf(y, law));
    step[static_cast<std::size_t>(y)] = shift_increment(y, law, factor);
  }
  Eigen::MatrixXd A = Eigen::MatrixXd::Identity(n, n);  // I - R
  for (int j = 0; j < n; ++j) {
    const double from = j * w;
    for (std::size_t y = 0; y < pmf.size(); ++y) {
      const double s = from + step[y];
      if (s > h) continue;  // absorbed: an alarm
      const int cell = s <= 0.5 * w ? 0 : std::min(n - 1, static_cast<int>(std::ceil(s / w - 0.5)));
      A(j, cell) -= pmf[y];
    }
  }
  const Eigen::VectorXd ones = Eigen::VectorXd::Ones(n);
  const Eigen::VectorXd arl = A.partialPivLu().solve(ones);
  const double a = arl(0);
  // A chain that never reaches h makes I - R singular: the solve then gives
  // huge or non-finite values.
  if (!std::isfinite(a) || a < 1 || a > 1e15) return std::numeric_limits<double>::infinity();
  return a;
}

double decision_limit(const CountLaw& law, double factor, double arl0, int states) {
  double lo = 0, hi = 1;
  while (chain_arl(law, factor, hi, states) < arl0 && hi < 1e3) {
    lo = hi;
    hi *= 2;
  }
  // Bisection to 1e-4 of h. The ARL of a count CUSUM is a step function of
  // h (the statistic lives near a lattice), so a target between two steps
  // cannot be met exactly: of the two limits either side of the step, keep
  // the one whose ARL is nearer the target on the log scale.
  double arl_lo = chain_arl(law, factor, lo, states);
  double arl_hi = chain_arl(law, factor, hi, states);
  for (int i = 0; i < 60 && hi - lo > 1e-4 * hi; ++i) {
    const double mid = 0.5 * (lo + hi);
    const double arl_mid = chain_arl(law, factor, mid, states);
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

CountLaw LimitTable::rounded(const CountLaw& law) {
  const double mean = std::clamp(law.mean, 1e-3, 1e5);
  const double mean_r = std::exp(kGridStep * static_cast<double>(std::lround(std::log(mean) / kGridStep)));
  CountLaw out{mean_r, 0};
  if (!law.poisson()) {
    const double index = 1 + law.mean / law.size;  // Var / mean
    const long cell = std::lround(std::log(index) / kGridStep);
    if (cell > 0) out.size = mean_r / (std::exp(kGridStep * static_cast<double>(cell)) - 1);
  }
  return out;
}

double LimitTable::limit(const CountLaw& law, double factor, double arl0) {
  const CountLaw r = rounded(law);
  const long mean_cell = std::lround(std::log(r.mean) / kGridStep);
  const long index_cell = r.poisson() ? 0 : std::lround(std::log(1 + r.mean / r.size) / kGridStep);
  const auto key = std::make_tuple(mean_cell, index_cell, factor, arl0);
  auto it = cache_.find(key);
  if (it != cache_.end()) return it->second;
  const double h = decision_limit(r, factor, arl0);
  cache_.emplace(key, h);
  return h;
}

}  // namespace tallyd::detect
