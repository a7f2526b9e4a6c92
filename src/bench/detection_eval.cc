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
//   build/detection_eval [--series N] [--seed S]
//
// Prints one table row per scenario and detector configuration; see
// docs/detection.md for the recorded figures and the command.
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <string>
#include <vector>

#include "bounds/random.h"
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

Series simulate(const Scenario& s, bool outbreak, bounds::Rng& rng) {
  Series out;
  out.counts.resize(kWeeks);
  if (outbreak) {
    out.onset = kEvalFrom + static_cast<int>(rng.uniform() * (s.kind == Scenario::silent ? 40 : 52 - s.length));
    out.length = s.kind == Scenario::silent ? kWeeks - out.onset : s.length;
  }
  const double sd0 = out.onset >= 0 ? std::sqrt(s.phi * baseline_mean(s, out.onset)) : 0;
  for (int t = 0; t < kWeeks; ++t) {
    const bool in = out.onset >= 0 && t >= out.onset && t < out.onset + out.length;
    double mean = baseline_mean(s, t);
    if (in && s.kind == Scenario::doubling) mean *= 2;
    std::int64_t y = draw(rng, mean, s.phi);
    if (in && s.kind == Scenario::spike) y += rng.poisson(s.k * sd0);
    if (in && s.kind == Scenario::silent) y = 0;
    out.counts[static_cast<std::size_t>(t)] = y;
  }
  return out;
}

struct Tally {
  long null_weeks = 0, null_alert_weeks = 0;
  long outbreaks = 0, detected = 0, outbreak_weeks = 0, outbreak_alert_weeks = 0;
  std::vector<int> delays;
  long cusum_records = 0, cusum_alarms = 0;  // in-control CUSUM records and alarms, high side, whole judged span
};

// True for an alert of the side the scenario's event moves counts to.
bool counts_for(const Alert& a, const Scenario& s) {
  return s.kind == Scenario::silent ? a.side == AlertSide::low : a.side == AlertSide::high;
}

void run(const Scenario& sc, const Config& cfg, const std::vector<Series>& data, Tally& tally) {
  SettingsTable settings;
  ModelSpec& m = settings.defaults.model;
  m.family = glm::Family::quasipoisson;
  m.trend = true;
  m.seasons = {Season{Seconds{static_cast<std::int64_t>(kDaysPerYear * kSecondsPerDay)}, 2}};
  m.window = Window{std::nullopt, 156};  // 3 years of weeks
  m.min_history = 52;
  m.reweight = cfg.reweight;
  m.alerted_weight = cfg.alerted_weight;
  AlertSpec& al = settings.defaults.alert;
  al.alpha = 0.001;
  al.direction = sc.kind == Scenario::silent ? Direction::low : Direction::high;
  DetectSpec& d = settings.defaults.detect;
  d.shift = cfg.shift;
  d.shift_factor = 2;
  d.shift_arl_records = 500;
  d.low_run = cfg.low_run;
  Engine engine(settings);
  for (std::size_t i = 0; i < data.size(); ++i) {
    const Series& s = data[i];
    const std::string id = "s" + std::to_string(i);
    int first_alert = -1;
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
      if (s.onset < 0) {
        ++tally.cusum_records;
        for (const Alert& a : r.detector_alerts) tally.cusum_alarms += a.detector == std::string("shift") ? 1 : 0;
        if (t >= kEvalFrom) {
          ++tally.null_weeks;
          tally.null_alert_weeks += alert ? 1 : 0;
        }
      } else if (t >= s.onset && t < s.onset + s.length) {
        ++tally.outbreak_weeks;
        tally.outbreak_alert_weeks += alert ? 1 : 0;
        if (alert && first_alert < 0) first_alert = t;
      }
    }
    if (s.onset >= 0) {
      ++tally.outbreaks;
      if (first_alert >= 0) {
        ++tally.detected;
        tally.delays.push_back(first_alert - s.onset);
      }
    }
  }
}

double median(std::vector<int> v) {
  if (v.empty()) return NAN;
  std::sort(v.begin(), v.end());
  const std::size_t n = v.size();
  return n % 2 ? v[n / 2] : 0.5 * (v[n / 2 - 1] + v[n / 2]);
}

}  // namespace

int main(int argc, char** argv) {
  int n = 100;
  std::uint64_t seed = 2013;
  for (int i = 1; i + 1 < argc; i += 2) {
    const std::string k = argv[i];
    if (k == "--series") n = std::atoi(argv[i + 1]);
    else if (k == "--seed") seed = std::strtoull(argv[i + 1], nullptr, 10);
    else {
      std::fprintf(stderr, "usage: detection_eval [--series N] [--seed S]\n");
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
  };
  std::printf("%-48s %-20s %9s %7s %7s %7s %9s\n", "scenario", "config", "FPR/week", "POD", "sens", "delay", "ARL(shift)");
  int si = 0;
  for (const Scenario& sc : scenarios) {
    bounds::Rng rng(seed * 1000 + static_cast<std::uint64_t>(si++));
    std::vector<Series> data;
    for (int i = 0; i < n; ++i) data.push_back(simulate(sc, false, rng));
    for (int i = 0; i < n; ++i) data.push_back(simulate(sc, true, rng));
    for (const Config& cfg : configs) {
      const bool relevant = (sc.kind == Scenario::silent) ? (std::string(cfg.name) == "plain" || cfg.low_run || cfg.shift)
                                                          : !cfg.low_run;
      if (!relevant) continue;
      Tally t;
      run(sc, cfg, data, t);
      char arl[32] = "-";
      if (cfg.shift) std::snprintf(arl, sizeof arl, "%.0f", t.cusum_alarms ? double(t.cusum_records) / t.cusum_alarms : INFINITY);
      std::printf("%-48s %-20s %9.5f %7.3f %7.3f %7.1f %9s\n", sc.name, cfg.name,
                  double(t.null_alert_weeks) / std::max(1L, t.null_weeks), double(t.detected) / std::max(1L, t.outbreaks),
                  double(t.outbreak_alert_weeks) / std::max(1L, t.outbreak_weeks), median(t.delays), arl);
      std::fflush(stdout);
    }
  }
  return 0;
}
