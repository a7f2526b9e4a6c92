#include "detect/fdr.h"

#include <algorithm>
#include <numeric>

namespace tallyd::detect {

std::vector<double> bh_adjust(const std::vector<double>& p_values) {
  const std::size_t m = p_values.size();
  std::vector<std::size_t> order(m);
  std::iota(order.begin(), order.end(), 0);
  std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) { return p_values[a] < p_values[b]; });
  std::vector<double> adjusted(m, 1.0);
  double running = 1.0;
  for (std::size_t r = m; r-- > 0;) {
    const std::size_t i = order[r];
    running = std::min(running, p_values[i] * static_cast<double>(m) / static_cast<double>(r + 1));
    adjusted[i] = std::min(running, 1.0);
  }
  return adjusted;
}

FdrCandidate fdr_candidate(const Observation& obs, const bounds::Bounds& b, const AlertSpec& spec) {
  AlertSide side = AlertSide::high;
  double p = b.p_high;
  if (spec.direction == Direction::low) {
    side = AlertSide::low;
    p = b.p_low;
  } else if (spec.direction == Direction::both) {
    side = b.p_high <= b.p_low ? AlertSide::high : AlertSide::low;
    p = std::min(1.0, 2 * std::min(b.p_high, b.p_low));
  }
  FdrCandidate c{bound_alert(obs, b, side, p, spec.alpha)};
  // The statistic is set when the step closes (the adjusted p-value); until
  // then the candidate keeps the default, as it always has.
  c.alert.statistic = 0;
  return c;
}

std::int64_t step_of(TimePoint time, Seconds step) {
  const std::int64_t t = time.time_since_epoch().count();
  const std::int64_t s = step.count();
  // Floor division, so times before 1970 fall in the right step.
  return t >= 0 ? t / s : -((-t + s - 1) / s);
}

std::vector<Alert> fdr_close(FdrState& state, const FdrSpec& spec) {
  std::vector<Alert> out;
  if (state.open_step) state.closed_through = std::max(*state.open_step, state.closed_through.value_or(*state.open_step));
  if (state.pending.empty()) {
    state.open_step.reset();
    return out;
  }
  std::vector<double> p;
  p.reserve(state.pending.size());
  for (const FdrCandidate& c : state.pending) p.push_back(c.alert.p_value);
  const std::vector<double> adjusted = bh_adjust(p);
  // The BH threshold actually used: i q / m at the largest rejected rank i.
  std::size_t rejected = 0;
  for (double a : adjusted) rejected += a <= spec.rate ? 1 : 0;
  const double threshold = spec.rate * static_cast<double>(rejected) / static_cast<double>(p.size());
  for (std::size_t i = 0; i < state.pending.size(); ++i) {
    if (adjusted[i] > spec.rate) continue;
    Alert a = state.pending[i].alert;
    a.detector = kFdrLabel;
    a.alpha = threshold;
    a.statistic = adjusted[i];
    out.push_back(std::move(a));
  }
  state.pending.clear();
  state.open_step.reset();
  return out;
}

std::vector<Alert> fdr_tick(FdrState& state, const FdrSpec& spec, TimePoint time) {
  if (state.open_step && step_of(time, spec.step) > *state.open_step) return fdr_close(state, spec);
  return {};
}

std::vector<Alert> fdr_offer(FdrState& state, const FdrSpec& spec, const FdrCandidate& candidate,
                             std::size_t known_series) {
  std::vector<Alert> out;
  const std::int64_t step = step_of(candidate.alert.time, spec.step);
  if (state.closed_through && step <= *state.closed_through) {
    // Late: its step was closed already. Decided alone, conservatively.
    const double level = spec.rate / static_cast<double>(std::max<std::size_t>(known_series, 1));
    if (candidate.alert.p_value <= level) {
      Alert a = candidate.alert;
      a.detector = kFdrLabel;
      a.alpha = level;
      a.statistic = std::min(1.0, candidate.alert.p_value * static_cast<double>(std::max<std::size_t>(known_series, 1)));
      out.push_back(std::move(a));
    }
    return out;
  }
  if (state.open_step && step > *state.open_step) out = fdr_close(state, spec);
  state.open_step = step;
  state.pending.push_back(candidate);
  return out;
}

}  // namespace tallyd::detect
