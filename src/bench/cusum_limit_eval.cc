// The shift CUSUM's decision-limit methods compared on recorded fits (not a
// test). Reads the file written by `detection_eval --dump FILE` (one line per
// judged record of the in-control series: what the limit reads and the
// simulated mean) and, per scenario, runs the CUSUM exactly as
// detect::run_detectors does (same increments, same cached limits, restart at
// 0 after an alarm) with each way of allowing for the fitted mean's error:
//   plug_in: the chain's counts follow the scored NB2 law (the error only
//            widens each record's variance; the first method);
//   fresh-:  each record's counts follow the predictive mixture over the
//            mean's error, phi taken as known;
//   fresh:   the same, and phi's estimation error held over a run (the
//            default, ShiftError::fresh with the fit's residual df);
//   held:    the mean's error held over a run (the alarm rate averaged over it).
// The dump has no residual df: it is min(week, window) - coefficients, the
// fit's df_residual for a window of `window` weekly records from week 0
// (detection_eval: 156 records, 6 coefficients).
// The fits do not depend on the CUSUM's alarms when alerted_weight = 1 (as in
// detection_eval's resistant+shift), so the realised run lengths are those
// the engine would give with each method, at a fraction of the cost.
//
// It also prints what the methods assume about the error, measured on the
// same records: the autocorrelation of the fitted log mean's error e_t =
// log(expected) - v/2 - log(true mean) (how persistent the error is), and of
// the standardized one-step prediction errors z_t = (y_t - expected) /
// sd (predictive), with Var(sum of m consecutive z) / m (1 when the errors
// are independent, as fresh assumes; near m when they are held).
//
//   build/cusum_limit_eval FILE [--arl0 A] [--factor K] [--window W] [--coefficients P]
//                          [--methods plug_in,fresh-,fresh,held]
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <map>
#include <string>
#include <vector>

#include "detect/shift_cusum.h"

using namespace tallyd;
using namespace tallyd::detect;

namespace {

struct Record {
  int week;
  std::int64_t count;
  InControl in;
  double true_mean;
};

struct Series {
  char side = 'h';
  std::vector<Record> records;
};

// Ratio sum(a) / sum(b) with the series as the unit, 95% interval (as detection_eval).
struct Interval {
  double value, lo, hi;
};

Interval ratio(const std::vector<double>& a, const std::vector<double>& b) {
  double sa = 0, sb = 0;
  for (std::size_t i = 0; i < a.size(); ++i) {
    sa += a[i];
    sb += b[i];
  }
  if (sa == 0) return {0, 0, 3 / sb};
  const double r = sa / sb, n = static_cast<double>(a.size());
  double ss = 0;
  for (std::size_t i = 0; i < a.size(); ++i) ss += (a[i] - r * b[i]) * (a[i] - r * b[i]);
  const double se = std::sqrt(n / std::max(n - 1, 1.0) * ss) / sb;
  return {r, std::max(0.0, r - 1.96 * se), r + 1.96 * se};
}

std::string show_arl(const std::vector<double>& alarms, const std::vector<double>& records) {
  const Interval r = ratio(alarms, records);
  double total = 0;
  for (double a : alarms) total += a;
  char out[96];
  if (r.value == 0) std::snprintf(out, sizeof out, ">%.0f (0 alarms)", 1 / r.hi);
  else
    std::snprintf(out, sizeof out, "%5.0f [%5.0f,%5.0f] (%4.0f alarms)", 1 / r.value, 1 / r.hi,
                  r.lo > 0 ? 1 / r.lo : INFINITY, total);
  return out;
}

// Lag-k autocorrelation of x within series, pooled (x centred on its overall mean).
double acf(const std::vector<std::vector<double>>& x, int lag) {
  double sum = 0, n = 0;
  for (const auto& s : x)
    for (double v : s) {
      sum += v;
      ++n;
    }
  const double m = sum / n;
  double num = 0, den = 0;
  for (const auto& s : x) {
    for (std::size_t t = 0; t < s.size(); ++t) {
      den += (s[t] - m) * (s[t] - m);
      if (t >= static_cast<std::size_t>(lag)) num += (s[t] - m) * (s[t - lag] - m);
    }
  }
  return num / den * n / (n - lag * static_cast<double>(x.size()));
}

// Var(sum of m consecutive values) / (m Var(value)) over non-overlapping blocks.
double block_ratio(const std::vector<std::vector<double>>& x, int m) {
  double s1 = 0, s2 = 0, b1 = 0, b2 = 0, n = 0, nb = 0;
  for (const auto& s : x) {
    for (double v : s) {
      s1 += v;
      s2 += v * v;
      ++n;
    }
    for (std::size_t t = 0; t + m <= s.size(); t += m) {
      double b = 0;
      for (int k = 0; k < m; ++k) b += s[t + k];
      b1 += b;
      b2 += b * b;
      ++nb;
    }
  }
  const double var = s2 / n - (s1 / n) * (s1 / n);
  const double bvar = b2 / nb - (b1 / nb) * (b1 / nb);
  return bvar / (m * var);
}

}  // namespace

int main(int argc, char** argv) {
  if (argc < 2) {
    std::fprintf(stderr, "usage: cusum_limit_eval FILE [--arl0 A] [--factor K] [--window W] [--coefficients P] "
                 "[--methods a,b]\n");
    return 1;
  }
  double arl0 = 500, factor = 2;
  int window = 156, coefficients = 6;
  std::string wanted;  // comma-separated method names; empty: all
  for (int i = 2; i + 1 < argc; i += 2) {
    const std::string k = argv[i];
    if (k == "--arl0") arl0 = std::atof(argv[i + 1]);
    else if (k == "--factor") factor = std::atof(argv[i + 1]);
    else if (k == "--window") window = std::atoi(argv[i + 1]);
    else if (k == "--coefficients") coefficients = std::atoi(argv[i + 1]);
    else if (k == "--methods") wanted = "," + std::string(argv[i + 1]) + ",";
  }
  std::FILE* f = std::fopen(argv[1], "r");
  if (!f) {
    std::fprintf(stderr, "cusum_limit_eval: cannot read %s\n", argv[1]);
    return 1;
  }
  std::map<int, std::map<long, Series>> scenarios;
  int si, week;
  char side;
  long series;
  long long count;
  Record r{};
  while (std::fscanf(f, "%d %c %ld %d %lld %lf %lf %lf %lf %lf", &si, &side, &series, &week, &count, &r.in.mean,
                     &r.in.theta, &r.in.phi, &r.in.eta_variance, &r.true_mean) == 10) {
    r.week = week;
    r.count = count;
    Series& s = scenarios[si][series];
    s.side = side;
    s.records.push_back(r);
  }
  std::fclose(f);

  struct Method {
    const char* name;
    int kind;  // 0 plug-in, 1 fresh without phi's error, 2 fresh, 3 held
  };
  const Method methods[] = {{"plug_in", 0}, {"fresh-", 1}, {"fresh", 2}, {"held", 3}};
  std::printf("target ARL0 %.0f, factor %.2f\n", arl0, factor);
  for (const auto& [index, all] : scenarios) {
    const double k = all.begin()->second.side == 'l' ? 1 / factor : factor;
    std::vector<std::vector<double>> errors, z;
    double v_sum = 0, n_sum = 0, e_sum = 0, e2_sum = 0, z_sum = 0, z2_sum = 0;
    for (const auto& [id, s] : all) {
      std::vector<double> e, zz;
      for (const Record& rec : s.records) {
        const double err = std::log(rec.in.mean) - 0.5 * rec.in.eta_variance - std::log(rec.true_mean);
        e.push_back(err);
        const CountLaw law = scored_law(rec.in);
        const double var = law.poisson() ? law.mean : law.mean + law.mean * law.mean / law.size;
        zz.push_back((static_cast<double>(rec.count) - law.mean) / std::sqrt(var));
        z_sum += zz.back();
        z2_sum += zz.back() * zz.back();
        v_sum += rec.in.eta_variance;
        e_sum += err;
        e2_sum += err * err;
        ++n_sum;
      }
      errors.push_back(e);
      z.push_back(zz);
    }
    std::printf("\nscenario %d (%zu series, %.0f records, side %c): mean v %.4f, log-mean error mean %+.4f "
                "mean square %.4f\n",
                index, all.size(), n_sum, all.begin()->second.side, v_sum / n_sum, e_sum / n_sum, e2_sum / n_sum);
    std::printf("  fitted log-mean error e: acf lag 1 %.3f, 4 %.3f, 13 %.3f, 26 %.3f\n", acf(errors, 1),
                acf(errors, 4), acf(errors, 13), acf(errors, 26));
    std::printf("  prediction errors z: mean %+.4f, variance %.4f (predictive law: 0, 1)\n", z_sum / n_sum,
                z2_sum / n_sum - (z_sum / n_sum) * (z_sum / n_sum));
    std::printf("  prediction errors z: acf lag 1 %+.3f, 2 %+.3f, 4 %+.3f; Var(sum of m)/m: m=4 %.3f, m=13 %.3f, "
                "m=26 %.3f\n",
                acf(z, 1), acf(z, 2), acf(z, 4), block_ratio(z, 4), block_ratio(z, 13), block_ratio(z, 26));
    for (const Method& m : methods) {
      if (!wanted.empty() && wanted.find("," + std::string(m.name) + ",") == std::string::npos) continue;
      LimitTable table;
      std::vector<double> alarms, records;
      for (const auto& [id, s] : all) {
        double stat = 0, a = 0;
        for (const Record& rec : s.records) {
          const CountLaw law = scored_law(rec.in);
          stat = std::max(0.0, stat + shift_increment(rec.count, law, k));
          InControl in = rec.in;
          if (m.kind == 2 && in.phi > 1) in.dispersion_df = std::min(rec.week, window) - coefficients;
          const double h = m.kind == 0 ? table.limit(law, k, arl0)
                                       : table.limit(in, k, arl0, m.kind == 3 ? ShiftError::held : ShiftError::fresh);
          if (stat > h) {
            ++a;
            stat = 0;
          }
        }
        alarms.push_back(a);
        records.push_back(static_cast<double>(s.records.size()));
      }
      std::printf("  %-8s ARL %s  (%zu limits)\n", m.name, show_arl(alarms, records).c_str(), table.size());
      std::fflush(stdout);
    }
  }
  return 0;
}
