// Evaluation of the detectors on simulated surveillance series (not a test).
//
// Simulation design after Noufaily et al. (2013): weekly negative-binomial
// baselines, mean mu_t = exp(a + b t + sum_j (c_j cos(2 pi j t / 52) +
// d_j sin(2 pi j t / 52))) with Var = phi mu_t; 5 years per series, the
// first 4 for training only, the last 52 weeks evaluated. In "outbreak"
// series one outbreak starts at a random week of the evaluated year: for
// `length` weeks each week gets Poisson(k sd) extra cases, sd = sqrt(phi mu)
// at the start week. "Null" series of the same scenario carry no outbreak
// and give the false-positive rate. Two extra scenarios exercise the shift
// and low-run detectors: a sustained doubling of the rate for 12 weeks, and
// a trap that goes silent (zeros) for the rest of the year.
//
//   build/detection_eval [--series N] [--seed S] [--arl-series M]
//                        [--family quasipoisson|negbin] [--scenario I]
//                        [--configs plain,resistant,...] [--past-outbreaks K]
//                        [--shift-error fresh|held] [--dump FILE]
//                        [--reweight-threshold X] [--reweight-rounds R] [--extra-nulls M]
//                        [--mean-correction on|off]
//
// --extra-nulls M adds M null series per scenario (after the others, so the
// first ones are unchanged): more null weeks pin down the thresholds of the
// matched comparison. Configuration `resistant@1` is `resistant` with the
// residual threshold 1 of Farrington et al. (1996); it runs only when named
// in --configs. Likewise `plain+guard2` and `resistant+guard2`: the same with
// model.guard_records = 2 (the two newest weeks kept out of the fit that
// judges the next one).
//
// --past-outbreaks K also places K outbreaks of the scenario's kind in the
// training years of every series (Noufaily et al. 2013 likewise put outbreaks
// in the baseline years, from memory), which is where a resistant baseline
// should pay; default 0.
//
// Prints one table row per scenario and detector configuration, with 95%
// confidence intervals; then, per scenario, the paired differences of each
// configuration against `plain` on the same series; then, for the
// configurations judged by the bound alone whose fits do not depend on alpha,
// the probability of detection at a matched false-positive rate (each
// configuration's p-value threshold set so that it alerts in no more scored
// null weeks than plain does at alpha); then (with --arl-series
// M > 0) the CUSUM's realised in-control run length on M further null series
// per scenario. See docs/detection.md for the recorded figures and commands.
//
// Intervals: rates over weeks (FPR, sensitivity, the CUSUM's alarm rate) use
// the ratio estimator with the series as the unit (alerts of one series are
// not independent: they share its fitted model), POD the binomial normal
// approximation, differences the paired mean over series.
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <string>
#include <vector>

#include "bounds/random.h"
#include "detect/detectors.h"
#include "engine/engine.h"

using namespace tallyd;

namespace {

constexpr int kWeeks = 260;       // 5 years
constexpr int kEvalFrom = 208;    // the last 52 weeks are evaluated
constexpr std::int64_t kWeek = 7 * 86400;
constexpr std::int64_t kStart = 1262563200;  // 2010-01-04T00:00:00Z, a Monday

struct Scenario {
  const char* name;
  double a, b;          // log-mean intercept, trend per week
  int harmonics;
  double c, d;          // first-harmonic amplitudes (the second gets half)
  double phi;           // dispersion (1 = Poisson)
  enum Kind { spike, doubling, silent } kind;
  double k;             // outbreak size in baseline sd per week (spike)
  int length;           // outbreak weeks
};

struct Config {
  const char* name;
  bool reweight;
  double alerted_weight;
  bool shift;
  bool low_run;
  double threshold = 0;  // model.reweight_threshold; 0: --reweight-threshold's (default the model's)
  std::size_t guard = 0;  // model.guard_records
};

struct Series {
  std::vector<std::int64_t> counts;
  int onset = -1;  // first outbreak week, -1 for null series
  int length = 0;
};

double baseline_mean(const Scenario& s, int t) {
  double eta = s.a + s.b * t;
  const double w = 2 * M_PI * t / 52.0;
  if (s.harmonics >= 1) eta += s.c * std::cos(w) + s.d * std::sin(w);
  if (s.harmonics >= 2) eta += 0.5 * s.c * std::cos(2 * w) + 0.5 * s.d * std::sin(2 * w);
  return std::exp(eta);
}

std::int64_t draw(bounds::Rng& rng, double mean, double phi) {
  return phi > 1 ? rng.negbin(mean, mean / (phi - 1)) : rng.poisson(mean);
}

// `past` further outbreaks of the scenario's kind and size start at uniform
// weeks of the training years (they may overlap), in null and outbreak series
// alike: the historical outbreaks that a resistant baseline must not learn.
// None for the silent trap. With past = 0 no extra random numbers are drawn,
// so the series are those of the earlier recorded runs.
Series simulate(const Scenario& s, bool outbreak, bounds::Rng& rng, int past) {
  Series out;
  out.counts.resize(kWeeks);
  if (outbreak) {
    out.onset = kEvalFrom + static_cast<int>(rng.uniform() * (s.kind == Scenario::silent ? 40 : 52 - s.length));
    out.length = s.kind == Scenario::silent ? kWeeks - out.onset : s.length;
  }
  std::vector<int> past_onsets;
  if (s.kind != Scenario::silent)
    for (int i = 0; i < past; ++i) past_onsets.push_back(static_cast<int>(rng.uniform() * (kEvalFrom - s.length)));
  auto outbreak_at = [&](int onset, int length, int t) { return onset >= 0 && t >= onset && t < onset + length; };
  for (int t = 0; t < kWeeks; ++t) {
    double mean = baseline_mean(s, t);
    double extra = 0;  // expected extra cases (spikes)
    const auto add = [&](int onset, int length) {
      if (!outbreak_at(onset, length, t)) return;
      if (s.kind == Scenario::doubling) mean *= 2;
      if (s.kind == Scenario::spike) extra += s.k * std::sqrt(s.phi * baseline_mean(s, onset));
    };
    add(out.onset, out.length);
    for (int onset : past_onsets) add(onset, s.length);
    std::int64_t y = draw(rng, mean, s.phi);
    if (extra > 0) y += rng.poisson(extra);
    if (s.kind == Scenario::silent && outbreak_at(out.onset, out.length, t)) y = 0;
    out.counts[static_cast<std::size_t>(t)] = y;
  }
  return out;
}

// Per-series outcomes of one configuration, for intervals and paired differences.
struct Tally {
  std::vector<double> null_weeks, null_alert_weeks;      // per null series, scored year
  std::vector<double> cusum_records, cusum_alarms;       // per null series, whole judged span
  std::vector<double> detected;                           // per outbreak series: 1 if any alert during the outbreak
  std::vector<double> outbreak_weeks, outbreak_alert_weeks;
  std::vector<int> delays;
  // The bound's p-value on the watched side: every scored null week, and the
  // smallest during each outbreak (for detection at a matched false-positive rate).
  std::vector<double> null_week_p, outbreak_min_p;
  std::vector<std::size_t> null_week_from;  // per null series: its first entry in null_week_p
  // Null series, judged records: squared error of the fitted log mean against
  // the simulated one, and the model's own variance of it (eta_variance).
  double log_error_squares = 0, eta_variances = 0, log_errors = 0;
};

double sum(const std::vector<double>& v) {
  double s = 0;
  for (double x : v) s += x;
  return s;
}

// Ratio sum(a) / sum(b) with its 95% interval, the series as the unit.
struct Interval {
  double value, lo, hi;
};

Interval ratio(const std::vector<double>& a, const std::vector<double>& b) {
  const double sa = sum(a), sb = std::max(sum(b), 1.0);
  const double r = sa / sb;
  const double n = static_cast<double>(a.size());
  if (sa == 0) return {0, 0, 3 / sb};  // no events: the "rule of three" upper bound
  double ss = 0;
  for (std::size_t i = 0; i < a.size(); ++i) ss += (a[i] - r * b[i]) * (a[i] - r * b[i]);
  const double se = std::sqrt(n / std::max(n - 1, 1.0) * ss) / sb;
  return {r, std::max(0.0, r - 1.96 * se), r + 1.96 * se};
}

// Mean of paired differences x_i - y_i with its 95% interval.
Interval paired(const std::vector<double>& x, const std::vector<double>& y) {
  const double n = static_cast<double>(x.size());
  double m = 0, ss = 0;
  for (std::size_t i = 0; i < x.size(); ++i) m += x[i] - y[i];
  m /= std::max(n, 1.0);
  for (std::size_t i = 0; i < x.size(); ++i) ss += (x[i] - y[i] - m) * (x[i] - y[i] - m);
  const double se = std::sqrt(ss / std::max(n - 1, 1.0) / std::max(n, 1.0));
  return {m, m - 1.96 * se, m + 1.96 * se};
}

// Per-series rates (alerts / weeks; 0 for a series with no weeks), for paired FPR differences.
std::vector<double> per_series(const std::vector<double>& a, const std::vector<double>& b) {
  std::vector<double> out(a.size());
  for (std::size_t i = 0; i < a.size(); ++i) out[i] = b[i] > 0 ? a[i] / b[i] : 0;
  return out;
}

// True for an alert of the side the scenario's event moves counts to.
bool counts_for(const Alert& a, const Scenario& s) {
  return s.kind == Scenario::silent ? a.side == AlertSide::low : a.side == AlertSide::high;
}

// With `dump` set, each judged record of a null series is written as one line
// "scenario side series week count mean theta phi eta_variance true_mean" (side
// h or l, the watched one): what the
// CUSUM's limit reads (detect::in_control_of) and the simulated mean, so limit
// methods can be compared on the same fits (cusum_limit_eval) without refitting.
// How the resistant configurations reweight (model.reweight_threshold,
// model.reweight_rounds).
struct Resistance {
  double threshold = ModelSpec{}.reweight_threshold;
  std::size_t rounds = ModelSpec{}.reweight_rounds;
  bool mean_correction = ModelSpec{}.reweight_mean_correction;
};

void run(int si, const Scenario& sc, const Config& cfg, const Resistance& resistance, glm::Family family,
         ShiftError shift_error, const std::vector<Series>& data, Tally& tally, std::FILE* dump = nullptr) {
  SettingsTable settings;
  ModelSpec& m = settings.defaults.model;
  m.family = family;
  m.trend = true;
  m.seasons = {Season{Seconds{static_cast<std::int64_t>(kDaysPerYear * kSecondsPerDay)}, 2}};
  m.window = Window{std::nullopt, 156};  // 3 years of weeks
  m.min_history = 52;
  m.reweight = cfg.reweight;
  m.reweight_threshold = cfg.threshold > 0 ? cfg.threshold : resistance.threshold;
  m.reweight_rounds = resistance.rounds;
  m.reweight_mean_correction = resistance.mean_correction;
  m.alerted_weight = cfg.alerted_weight;
  m.guard_records = cfg.guard;
  AlertSpec& al = settings.defaults.alert;
  al.alpha = 0.001;
  al.direction = sc.kind == Scenario::silent ? Direction::low : Direction::high;
  DetectSpec& d = settings.defaults.detect;
  d.shift = cfg.shift;
  d.shift_factor = 2;
  d.shift_arl_records = 500;
  d.shift_error = shift_error;
  d.low_run = cfg.low_run;
  Engine engine(settings);
  for (std::size_t i = 0; i < data.size(); ++i) {
    const Series& s = data[i];
    const std::string id = "s" + std::to_string(i);
    int first_alert = -1;
    double min_p = 1;
    double weeks = 0, alert_weeks = 0, records = 0, alarms = 0;
    for (int t = 0; t < kWeeks; ++t) {
      Observation o;
      o.series = id;
      o.time = TimePoint{Seconds{kStart + t * kWeek}};
      o.count = s.counts[static_cast<std::size_t>(t)];
      IngestResult r = engine.ingest(o);
      if (r.kind != IngestResult::Kind::judged) continue;
      std::vector<Alert> alerts = r.detector_alerts;
      if (r.alert) alerts.push_back(*r.alert);
      bool alert = false;
      for (const Alert& a : alerts) alert = alert || counts_for(a, sc);
      const bounds::Bounds& b = r.prediction->bounds;
      const double p = sc.kind == Scenario::silent ? b.p_low : b.p_high;
      if (s.onset < 0) {
        const double v = r.prediction->predictor.eta_variance;
        const double e = std::log(r.prediction->bounds.expected) - 0.5 * v - std::log(baseline_mean(sc, t));
        tally.log_error_squares += e * e;
        tally.log_errors += e;
        tally.eta_variances += v;
        ++records;
        if (dump) {
          const detect::InControl in = detect::in_control_of(*r.prediction);
          std::fprintf(dump, "%d %c %zu %d %lld %.17g %.17g %.17g %.17g %.17g\n", si,
                       sc.kind == Scenario::silent ? 'l' : 'h', i, t,
                       static_cast<long long>(o.count), in.mean, in.theta, in.phi, in.eta_variance,
                       baseline_mean(sc, t));
        }
        for (const Alert& a : r.detector_alerts) alarms += a.detector == std::string("shift") ? 1 : 0;
        if (t >= kEvalFrom) {
          ++weeks;
          alert_weeks += alert ? 1 : 0;
          tally.null_week_p.push_back(p);
        }
      } else if (t >= s.onset && t < s.onset + s.length) {
        ++weeks;
        alert_weeks += alert ? 1 : 0;
        if (alert && first_alert < 0) first_alert = t;
        min_p = std::min(min_p, p);
      }
    }
    if (s.onset < 0) {
      tally.null_week_from.push_back(tally.null_week_p.size() - static_cast<std::size_t>(weeks));
      tally.null_weeks.push_back(weeks);
      tally.null_alert_weeks.push_back(alert_weeks);
      tally.cusum_records.push_back(records);
      tally.cusum_alarms.push_back(alarms);
    } else {
      tally.outbreak_weeks.push_back(weeks);
      tally.outbreak_alert_weeks.push_back(alert_weeks);
      tally.detected.push_back(first_alert >= 0 ? 1 : 0);
      tally.outbreak_min_p.push_back(min_p);
      if (first_alert >= 0) tally.delays.push_back(first_alert - s.onset);
    }
  }
}

// Detection at a matched false-positive rate: the bound's threshold on the
// p-value is moved until this configuration alerts in at most `null_alerts`
// scored null weeks (the count plain had at the configured alpha), and each
// outbreak counts as detected when its smallest p-value is below it. Per
// outbreak series, 1 or 0, for a paired comparison. Only for configurations
// whose fits do not depend on alpha (not alerted_weight < 1) and that judge
// by the bound alone.
std::vector<double> detected_at(const Tally& t, std::size_t null_alerts) {
  std::vector<double> p = t.null_week_p;
  std::sort(p.begin(), p.end());
  const double threshold = null_alerts < p.size() ? p[null_alerts] : 1.0;  // alert when p < threshold
  std::vector<double> out;
  for (double m : t.outbreak_min_p) out.push_back(m < threshold ? 1 : 0);
  return out;
}

// The paired dPOD at a matched false-positive rate with a percentile
// bootstrap interval over series (Efron and Tibshirani 1993): null and
// outbreak series are resampled with replacement, the same draws for both
// configurations, and both thresholds are found again in every replicate.
// Unlike the paired interval, this one includes the noise of the thresholds,
// which rest on a few dozen null alerts.
Interval matched_bootstrap(const Tally& mine, const Tally& plain, double alpha, int replicates, std::uint64_t seed) {
  bounds::Rng rng(seed);
  const std::size_t nulls = plain.null_week_from.size(), outbreaks = plain.outbreak_min_p.size();
  std::vector<double> diffs, a, b;
  for (int r = 0; r < replicates && nulls > 0 && outbreaks > 0; ++r) {
    a.clear();
    b.clear();
    for (std::size_t i = 0; i < nulls; ++i) {
      const std::size_t k = std::min(nulls - 1, static_cast<std::size_t>(rng.uniform() * static_cast<double>(nulls)));
      const std::size_t to = k + 1 < nulls ? plain.null_week_from[k + 1] : plain.null_week_p.size();
      a.insert(a.end(), mine.null_week_p.begin() + static_cast<long>(plain.null_week_from[k]),
               mine.null_week_p.begin() + static_cast<long>(to));
      b.insert(b.end(), plain.null_week_p.begin() + static_cast<long>(plain.null_week_from[k]),
               plain.null_week_p.begin() + static_cast<long>(to));
    }
    const std::size_t allowed =
        static_cast<std::size_t>(std::count_if(b.begin(), b.end(), [&](double p) { return p <= alpha; }));
    const auto threshold = [allowed](std::vector<double>& p) {
      if (allowed >= p.size()) return 1.0;
      std::nth_element(p.begin(), p.begin() + static_cast<long>(allowed), p.end());
      return p[allowed];
    };
    const double ta = threshold(a), tb = threshold(b);
    double d = 0;
    for (std::size_t i = 0; i < outbreaks; ++i) {
      const std::size_t k =
          std::min(outbreaks - 1, static_cast<std::size_t>(rng.uniform() * static_cast<double>(outbreaks)));
      d += (mine.outbreak_min_p[k] < ta ? 1.0 : 0.0) - (plain.outbreak_min_p[k] < tb ? 1.0 : 0.0);
    }
    diffs.push_back(d / static_cast<double>(outbreaks));
  }
  if (diffs.empty()) return {NAN, NAN, NAN};
  std::sort(diffs.begin(), diffs.end());
  const auto at = [&](double q) { return diffs[static_cast<std::size_t>(q * static_cast<double>(diffs.size() - 1))]; };
  return {at(0.5), at(0.025), at(0.975)};
}

std::size_t alerted_null_weeks(const Tally& t, double alpha) {
  return static_cast<std::size_t>(
      std::count_if(t.null_week_p.begin(), t.null_week_p.end(), [&](double p) { return p <= alpha; }));
}

double median(std::vector<int> v) {
  if (v.empty()) return NAN;
  std::sort(v.begin(), v.end());
  const std::size_t n = v.size();
  return n % 2 ? v[n / 2] : 0.5 * (v[n / 2 - 1] + v[n / 2]);
}

// "0.00123 [0.00080,0.00170]"
std::string show(const Interval& i, const char* fmt) {
  char a[32], b[32], c[32], out[112];
  std::snprintf(a, sizeof a, fmt, i.value);
  std::snprintf(b, sizeof b, fmt, i.lo);
  std::snprintf(c, sizeof c, fmt, i.hi);
  std::snprintf(out, sizeof out, "%s [%s,%s]", a, b, c);
  return out;
}

// The realised in-control ARL (records per alarm) with its interval, from the alarm rate's.
std::string show_arl(const Tally& t) {
  const Interval r = ratio(t.cusum_alarms, t.cusum_records);
  if (r.value == 0) return ">" + std::to_string(static_cast<long>(1 / r.hi));
  char out[64];
  std::snprintf(out, sizeof out, "%.0f [%.0f,%.0f] (%.0f alarms)", 1 / r.value, 1 / r.hi,
                r.lo > 0 ? 1 / r.lo : INFINITY, sum(t.cusum_alarms));
  return out;
}

}  // namespace

int main(int argc, char** argv) {
  int n = 100, arl_series = 0, only = -1, past = 0, extra_nulls = 0;
  std::string wanted;  // comma-separated configuration names; empty: all
  std::FILE* dump = nullptr;
  ShiftError shift_error = DetectSpec{}.shift_error;
  std::uint64_t seed = 2013;
  glm::Family family = glm::Family::quasipoisson;
  Resistance resistance;
  for (int i = 1; i + 1 < argc; i += 2) {
    const std::string k = argv[i], v = argv[i + 1];
    if (k == "--series") n = std::atoi(v.c_str());
    else if (k == "--seed") seed = std::strtoull(v.c_str(), nullptr, 10);
    else if (k == "--arl-series") arl_series = std::atoi(v.c_str());
    else if (k == "--extra-nulls") extra_nulls = std::atoi(v.c_str());
    else if (k == "--mean-correction") resistance.mean_correction = v == "on";
    else if (k == "--past-outbreaks") past = std::atoi(v.c_str());
    else if (k == "--reweight-threshold") resistance.threshold = std::atof(v.c_str());
    else if (k == "--reweight-rounds") resistance.rounds = static_cast<std::size_t>(std::max(1, std::atoi(v.c_str())));
    else if (k == "--scenario") only = std::atoi(v.c_str());
    else if (k == "--configs") wanted = "," + v + ",";
    else if (k == "--shift-error" && (v == "fresh" || v == "held"))
      shift_error = v == "held" ? ShiftError::held : ShiftError::fresh;
    else if (k == "--dump") {
      dump = std::fopen(v.c_str(), "w");
      if (!dump) {
        std::fprintf(stderr, "detection_eval: cannot write %s\n", v.c_str());
        return 1;
      }
    }
    else if (k == "--family" && (v == "quasipoisson" || v == "negbin"))
      family = v == "negbin" ? glm::Family::negbin : glm::Family::quasipoisson;
    else {
      std::fprintf(stderr,
                   "usage: detection_eval [--series N] [--seed S] [--arl-series M] [--family quasipoisson|negbin] "
                   "[--scenario I] [--configs a,b] [--past-outbreaks K] [--shift-error fresh|held] [--dump FILE] "
                   "[--reweight-threshold X] [--reweight-rounds R] [--extra-nulls M] [--mean-correction on|off]\n");
      return 1;
    }
  }
  const Scenario scenarios[] = {
      {"mean~1 Poisson, 1 harmonic, spike 5sd x4w", 0.0, 0.0, 1, 0.5, 0.3, 1.0, Scenario::spike, 5, 4},
      {"mean~5 phi=2, trend, 1 harmonic, spike 3sd x4w", 1.5, 0.001, 1, 0.6, 0.2, 2.0, Scenario::spike, 3, 4},
      {"mean~20 phi=3, 2 harmonics, spike 3sd x4w", 3.0, 0.0, 2, 0.5, 0.4, 3.0, Scenario::spike, 3, 4},
      {"mean~100 phi=5, trend, 2 harmonics, spike 2sd x6w", 4.6, 0.0005, 2, 0.4, 0.3, 5.0, Scenario::spike, 2, 6},
      {"mean~5 phi=1.5, doubling x12w", 1.6, 0.0, 1, 0.3, 0.2, 1.5, Scenario::doubling, 0, 12},
      {"mean~3 Poisson, trap silent to year end", 1.1, 0.0, 1, 0.3, 0.2, 1.0, Scenario::silent, 0, 0},
  };
  const Config configs[] = {
      {"plain", false, 1.0, false, false},
      {"resistant", true, 1.0, false, false},
      {"resistant+alerted0", true, 0.0, false, false},
      {"resistant+shift", true, 1.0, true, false},
      {"resistant+low_run", true, 1.0, false, true},
      {"resistant@1", true, 1.0, false, false, 1.0},  // Farrington et al. (1996)'s threshold
      {"plain+guard2", false, 1.0, false, false, 0, 2},
      {"resistant+guard2", true, 1.0, false, false, 0, 2},
  };
  std::printf("family %s, %d null + %d outbreak series per scenario, seed %llu, %d past outbreaks per series in the "
              "training years, shift_error %s; 95%% intervals in brackets\n",
              family == glm::Family::negbin ? "negbin" : "quasipoisson", n + extra_nulls, n, static_cast<unsigned long long>(seed), past,
              shift_error == ShiftError::held ? "held" : "fresh");
  std::printf("%-3s %-48s %-20s %-28s %-21s %-21s %6s\n", "#", "scenario", "config", "FPR/week", "POD", "sens", "delay");
  std::vector<std::string> paired_lines, matched_lines, arl_lines;
  const int count = static_cast<int>(sizeof scenarios / sizeof scenarios[0]);
  for (int si = 0; si < count; ++si) {
    if (only >= 0 && si != only) continue;
    const Scenario& sc = scenarios[si];
    bounds::Rng rng(seed * 1000 + static_cast<std::uint64_t>(si));
    std::vector<Series> data;
    for (int i = 0; i < n; ++i) data.push_back(simulate(sc, false, rng, past));
    for (int i = 0; i < n; ++i) data.push_back(simulate(sc, true, rng, past));
    // After the outbreak series, so that the first 2n series stay those of
    // runs without them.
    for (int i = 0; i < extra_nulls; ++i) data.push_back(simulate(sc, false, rng, past));
    Tally plain;
    for (const Config& cfg : configs) {
      const bool relevant = (sc.kind == Scenario::silent) ? (std::string(cfg.name) == "plain" || cfg.low_run || cfg.shift)
                                                          : !cfg.low_run;
      if (!relevant) continue;
      const bool named = !wanted.empty() && wanted.find("," + std::string(cfg.name) + ",") != std::string::npos;
      if (!wanted.empty() && !named) continue;
      if ((cfg.threshold > 0 || cfg.guard > 0) && !named) continue;  // only on request
      Tally t;
      run(si, sc, cfg, resistance, family, shift_error, data, t);
      std::printf("%-3d %-48s %-20s %-28s %-21s %-21s %6.1f\n", si, sc.name, cfg.name,
                  show(ratio(t.null_alert_weeks, t.null_weeks), "%.5f").c_str(),
                  show(ratio(t.detected, std::vector<double>(t.detected.size(), 1.0)), "%.3f").c_str(),
                  show(ratio(t.outbreak_alert_weeks, t.outbreak_weeks), "%.3f").c_str(), median(t.delays));
      std::fflush(stdout);
      if (std::string(cfg.name) == "plain") {
        plain = t;
        continue;
      }
      for (double level : {0.001, 0.01}) {
        if (cfg.shift || cfg.low_run || cfg.alerted_weight != 1.0 || plain.null_week_p.empty()) break;
        const std::size_t k = alerted_null_weeks(plain, level);
        const std::vector<double> mine = detected_at(t, k), theirs = detected_at(plain, k);
        const Interval boot = matched_bootstrap(t, plain, level, 1000, seed + 7);
        char line[320];
        std::snprintf(line, sizeof line,
                      "%-3d %-48s %-20s %-5g at <= %zu of %zu null weeks alerted: POD %s vs plain %s, dPOD %s, "
                      "bootstrap [%+.3f,%+.3f]",
                      si, sc.name, cfg.name, level, k, t.null_week_p.size(),
                      show(ratio(mine, std::vector<double>(mine.size(), 1.0)), "%.3f").c_str(),
                      show(ratio(theirs, std::vector<double>(theirs.size(), 1.0)), "%.3f").c_str(),
                      show(paired(mine, theirs), "%+.3f").c_str(), boot.lo, boot.hi);
        matched_lines.push_back(line);
      }
      char line[256];
      std::snprintf(line, sizeof line, "%-3d %-48s %-20s dPOD %-27s dFPR %-30s ARL(shift) %s", si, sc.name, cfg.name,
                    show(paired(t.detected, plain.detected), "%+.3f").c_str(),
                    show(paired(per_series(t.null_alert_weeks, t.null_weeks),
                                per_series(plain.null_alert_weeks, plain.null_weeks)),
                         "%+.5f")
                        .c_str(),
                    cfg.shift ? show_arl(t).c_str() : "-");
      paired_lines.push_back(line);
    }
    if (arl_series > 0) {
      // Only null series: the realised in-control run length of the CUSUM.
      bounds::Rng arl_rng(seed * 1000 + 500 + static_cast<std::uint64_t>(si));
      std::vector<Series> nulls;
      for (int i = 0; i < arl_series; ++i) nulls.push_back(simulate(sc, false, arl_rng, past));
      Tally t;
      run(si, sc, configs[3], resistance, family, shift_error, nulls, t, dump);
      char line[512];
      const double judged = std::max(1.0, sum(t.cusum_records));
      std::snprintf(line, sizeof line,
                    "%-3d %-48s %d null series, %.0f judged records: ARL %s (target 500); log-mean error: mean %+.4f, "
                    "mean square %.4f, model's eta_variance %.4f",
                    si, sc.name, arl_series, judged, show_arl(t).c_str(), t.log_errors / judged,
                    t.log_error_squares / judged, t.eta_variances / judged);
      arl_lines.push_back(line);
      std::fprintf(stderr, "%s\n", line);
    }
  }
  std::printf("\npaired against plain on the same series (dPOD: detected; dFPR: per-series alert-week rate)\n");
  for (const std::string& l : paired_lines) std::printf("%s\n", l.c_str());
  std::printf("\nat a matched false-positive rate (the bound's p-value threshold moved until the configuration alerts in "
              "no more null weeks than plain at alpha 0.001)\n");
  for (const std::string& l : matched_lines) std::printf("%s\n", l.c_str());
  if (!arl_lines.empty()) {
    std::printf("\nshift CUSUM (factor 2, high side; low side for the silent trap), resistant baseline\n");
    for (const std::string& l : arl_lines) std::printf("%s\n", l.c_str());
  }
  if (dump) std::fclose(dump);
  return 0;
}
