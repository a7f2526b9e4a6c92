#include "detect/detectors.h"

#include <algorithm>
#include <cmath>
#include <limits>

#include "bounds/predictive.h"

namespace tallyd::detect {
namespace {

Alert base_alert(const Observation& obs, const Prediction& p, const AlertSpec& spec) {
  Alert a;
  a.time = obs.time;
  a.series = obs.series;
  a.count = obs.count;
  a.exposure = obs.exposure;
  a.expected = p.bounds.expected;
  a.lower = p.bounds.lower;
  a.upper = p.bounds.upper;
  a.alpha = spec.alpha;
  return a;
}

// P(Y <= c) for the largest c with P(Y <= c) <= quantile (c = 0 when even
// P(Y = 0) exceeds it), under the full predictive mixture; c is returned too.
struct LowThreshold {
  std::int64_t count;
  double probability;
};

LowThreshold low_threshold(const Observation& obs, const Prediction& p, const SeriesSettings& s) {
  bounds::Options o;
  o.method = s.alert.method;
  o.draws = s.alert.draws;
  o.quadrature_nodes = s.alert.quadrature_nodes;
  o.grid_node_limit = s.alert.grid_node_limit;
  o.alpha = s.detect.low_run_quantile;
  // A stream of its own (seed + 1) so the bound's draws are not reused.
  auto eval = [&](std::int64_t y) {
    if (o.method == bounds::Method::simulate) {
      bounds::Rng rng = bounds::Rng::for_record(s.alert.seed + 1, obs.series, obs.time.time_since_epoch().count());
      return bounds::evaluate(p.predictor, p.noise, y, o, &rng);
    }
    return bounds::evaluate(p.predictor, p.noise, y, o, nullptr);
  };
  const bounds::Bounds at_count = eval(obs.count);
  // lower = smallest l with P(Y <= l) > quantile, so c = lower - 1.
  const std::int64_t c = std::max<std::int64_t>(at_count.lower - 1, 0);
  if (obs.count > c) return {c, std::numeric_limits<double>::quiet_NaN()};
  const double prob = obs.count == c ? at_count.p_low : eval(c).p_low;
  return {c, prob};
}

}  // namespace

// Standard errors of phi-hat within which a quasi-Poisson noise counts as
// Poisson for the CUSUM (in_control_of).
constexpr double kPoissonBandSe = 1;

InControl in_control_of(const Prediction& prediction, double dispersion_df) {
  InControl in;
  in.mean = std::max(prediction.bounds.expected, 1e-6);
  const bounds::CountNoise& n = prediction.noise;
  if (n.family == glm::Family::negbin && std::isfinite(n.theta) && n.theta > 0) in.theta = n.theta;
  if (n.family == glm::Family::quasipoisson && std::isfinite(n.dispersion) && n.dispersion > 1) {
    const bool df_known = std::isfinite(dispersion_df) && dispersion_df > 0;
    // With phi's degrees of freedom known, a phi-hat within two standard
    // errors of 1 (sqrt(2 / df) each, chi-squared) is no evidence of
    // overdispersion: the CUSUM then scores and calibrates as Poisson. Kept
    // as an estimate, such a phi-hat is above 1 about half the time on
    // Poisson counts and never below (phi <= 1 counts as Poisson), so the
    // limit only ever widened and the run length came out long.
    if (!df_known || n.dispersion > 1 + kPoissonBandSe * std::sqrt(2 / dispersion_df)) {
      in.phi = n.dispersion;
      if (df_known) in.dispersion_df = dispersion_df;
    }
  }
  // The error of the fitted log mean (log link only: other links have no
  // multiplicative error to carry over).
  const double v = prediction.predictor.eta_variance;
  if (n.link == glm::Link::log && std::isfinite(v) && v > 0) in.eta_variance = v;
  return in;
}

CountLaw law_of(const Prediction& prediction) { return scored_law(in_control_of(prediction)); }

std::vector<Alert> run_detectors(DetectorState& state, const Observation& obs, const Prediction& prediction,
                                 const SeriesSettings& settings, LimitTable& limits, double dispersion_df) {
  std::vector<Alert> out;
  const DetectSpec& d = settings.detect;
  const bool watch_high = settings.alert.direction != Direction::low;
  const bool watch_low = settings.alert.direction != Direction::high;
  if (!std::isfinite(prediction.bounds.expected)) return out;  // no usable prediction: nothing to add

  if (d.shift) {
    const InControl in = in_control_of(prediction, dispersion_df);
    const CountLaw law = scored_law(in);
    const double per_record = 1.0 / d.shift_arl_records;
    if (watch_high) {
      state.shift_high = std::max(0.0, state.shift_high + shift_increment(obs.count, law, d.shift_factor));
      const double h = limits.limit(in, d.shift_factor, d.shift_arl_records, d.shift_error);
      if (state.shift_high > h) {
        Alert a = base_alert(obs, prediction, settings.alert);
        a.side = AlertSide::high;
        a.p_value = prediction.bounds.p_high;
        a.alpha = per_record;
        a.detector = kShiftLabel;
        a.statistic = state.shift_high;
        out.push_back(std::move(a));
        state.shift_high = 0;  // restart after an alarm (common practice)
      }
    }
    if (watch_low) {
      const double down = 1.0 / d.shift_factor;
      state.shift_low = std::max(0.0, state.shift_low + shift_increment(obs.count, law, down));
      const double h = limits.limit(in, down, d.shift_arl_records, d.shift_error);
      if (state.shift_low > h) {
        Alert a = base_alert(obs, prediction, settings.alert);
        a.side = AlertSide::low;
        a.p_value = prediction.bounds.p_low;
        a.alpha = per_record;
        a.detector = kShiftLabel;
        a.statistic = state.shift_low;
        out.push_back(std::move(a));
        state.shift_low = 0;
      }
    }
  }

  if (d.low_run && watch_low) {
    const LowThreshold t = low_threshold(obs, prediction, settings);
    if (!(t.probability >= 0)) {  // not low (or NaN): the run ends
      state.run_log_probability = 0;
      state.run_records = 0;
    } else {
      state.run_log_probability += std::log(std::max(t.probability, 1e-300));
      ++state.run_records;
      if (state.run_log_probability <= std::log(d.low_run_alpha)) {
        Alert a = base_alert(obs, prediction, settings.alert);
        a.side = AlertSide::low;
        a.p_value = std::exp(state.run_log_probability);
        a.alpha = d.low_run_alpha;
        a.detector = kLowRunLabel;
        a.statistic = state.run_records;
        out.push_back(std::move(a));
        state.run_log_probability = 0;  // a new run starts after an alert
        state.run_records = 0;
      }
    }
  }
  return out;
}

}  // namespace tallyd::detect
