// tallyd against the usual script: a rolling-window refit with R's glm for
// every new count, computing the same predictive bounds (benchmark, not a
// test). Needs Rscript (Debian r-base-core).
//
//   build/r_compare_bench [--series N] [--days D] [--window W] [--alpha A] [--dir PATH]
//
// Generates a daily feed (N series x D days, seasonal negative-binomial
// counts with a few invented spikes), runs it through tallyd's Engine
// (quasi-Poisson, log link, trend, annual and weekly harmonic pair, refit
// every record, quadrature bounds; timed best of 5, and again with the
// screen on and with the screen plus the guarded refit cadence, whose alerts
// are compared too), writes each record's design row and
// tallyd's bounds to PATH/r_compare_feed.csv, then runs an R script that,
// for every record tallyd judged, fits glm(quasipoisson) to the same window
// of earlier records and computes the bounds of the same predictive mixture
// (eta* ~ N(x'b + offset, x' vcov x), count noise NB2 with size mu/(phi-1),
// Poisson when phi <= 1) by its own trapezoid rule over eta* (4001 points,
// +-10 sd) and pnbinom/ppois. Prints both timings, the ratio, and how many
// records differ in lower bound, upper bound and alert.
#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

#include "bounds/random.h"
#include "engine/engine.h"
#include "series/design.h"

using namespace tallyd;

namespace {

struct Args {
  int series = 10;
  int days = 200;
  std::size_t window = 365;
  double alpha = 0.001;
  std::string dir = ".";
};

Args parse_args(int argc, char** argv) {
  Args a;
  for (int i = 1; i + 1 < argc; i += 2) {
    const std::string k = argv[i];
    const char* v = argv[i + 1];
    if (k == "--series") a.series = std::atoi(v);
    else if (k == "--days") a.days = std::atoi(v);
    else if (k == "--window") a.window = static_cast<std::size_t>(std::atol(v));
    else if (k == "--alpha") a.alpha = std::atof(v);
    else if (k == "--dir") a.dir = v;
    else {
      std::fprintf(stderr, "unknown option %s\n", argv[i]);
      std::exit(1);
    }
  }
  return a;
}

// The R side, written out next to the feed. Columns of the feed: series,
// judged (0/1), count, offset, tallyd lower and upper, then x1..xp.
constexpr const char* kRScript = R"R(
args <- commandArgs(trailingOnly = TRUE)
feed <- read.csv(args[1])
window <- as.integer(args[3]); alpha <- as.numeric(args[4])
xcols <- grep("^x", names(feed))
z <- seq(-10, 10, length.out = 4001)
wz <- dnorm(z); wz <- wz / sum(wz)
mixture_sf <- function(k, mu, phi) {  # P(Y > k) of the mixture, k a vector
  sapply(k, function(kk) {
    if (phi > 1) sum(wz * pnbinom(kk, size = mu / (phi - 1), mu = mu, lower.tail = FALSE))
    else sum(wz * ppois(kk, mu, lower.tail = FALSE))
  })
}
smallest <- function(pred, hi) {  # smallest k in [0, hi] with pred(k) TRUE (pred monotone)
  lo <- -1
  while (hi - lo > 1) { mid <- (lo + hi) %/% 2; if (pred(mid)) hi <- mid else lo <- mid }
  hi
}
out <- data.frame(row = integer(0), lower = numeric(0), upper = numeric(0))
started <- proc.time()[["elapsed"]]
rows <- list()
for (s in unique(feed$series)) {
  idx <- which(feed$series == s)
  for (j in seq_along(idx)) {
    i <- idx[j]
    if (feed$judged[i] != 1) next
    train <- idx[max(1, j - window):(j - 1)]
    X <- as.matrix(feed[train, xcols]); y <- feed$count[train]; off <- feed$offset[train]
    fit <- glm(y ~ X - 1 + offset(off), family = quasipoisson())
    b <- coef(fit); b[is.na(b)] <- 0
    V <- vcov(fit)
    x <- as.numeric(feed[i, xcols])
    eta <- sum(x * b) + feed$offset[i]
    v <- max(0, as.numeric(t(x) %*% V %*% x))
    phi <- summary(fit)$dispersion
    mu <- exp(eta + sqrt(v) * z)
    hi <- max(10, ceiling(qnbinom(1 - alpha / 10, size = max(mu) / max(phi - 1, 1e-9), mu = max(mu))) * 2)
    upper <- smallest(function(k) mixture_sf(k, mu, phi) <= alpha, hi)
    lower <- smallest(function(k) 1 - mixture_sf(k, mu, phi) > alpha, hi)
    rows[[length(rows) + 1]] <- c(i, lower, upper)
  }
}
elapsed <- proc.time()[["elapsed"]] - started
res <- do.call(rbind, rows)
write.csv(data.frame(row = res[, 1], lower = res[, 2], upper = res[, 3]), args[2], row.names = FALSE)
cat(sprintf("%.3f\n", elapsed), file = paste0(args[2], ".seconds"))
)R";

}  // namespace

int main(int argc, char** argv) {
  const Args a = parse_args(argc, argv);

  SettingsTable settings;
  ModelSpec& m = settings.defaults.model;
  m.family = glm::Family::quasipoisson;
  m.trend = true;
  m.seasons = {Season{Seconds{31557600}, 1}, Season{Seconds{7 * 86400}, 1}};
  m.window = Window{std::nullopt, a.window};
  m.min_history = 30;
  // The R side is the usual script: a plain rolling glm, no resistant refit.
  m.reweight = false;
  settings.defaults.alert.alpha = a.alpha;

  // The feed, in time order, with invented spikes and dips.
  std::vector<Observation> feed;
  bounds::Rng rng(2024);
  std::vector<double> level(static_cast<std::size_t>(a.series));
  for (double& l : level) l = std::log(2.0 + 40.0 * rng.uniform());
  const TimePoint start = parse_time("2023-01-01T06:00:00Z").value();
  for (int d = 0; d < a.days; ++d) {
    for (int s = 0; s < a.series; ++s) {
      Observation o;
      o.series = "r-" + std::to_string(s);
      o.time = start + Seconds{static_cast<std::int64_t>(d) * 86400};
      o.exposure = 0.5 + rng.uniform();
      const double yr = 2 * M_PI * d / 365.25, wk = 2 * M_PI * d / 7.0;
      double mu = o.exposure * std::exp(level[static_cast<std::size_t>(s)] + 0.5 * std::sin(yr) + 0.2 * std::cos(wk));
      if ((d * 7 + s * 13) % 97 == 0) mu *= 4;  // spikes
      o.count = rng.negbin(mu, 5.0);
      feed.push_back(std::move(o));
    }
  }

  // tallyd's side, timed as the best of five fresh runs (one run of a small
  // feed takes tens of milliseconds, where the shared machine's noise is
  // large); `results` keeps the last run's outcomes.
  const auto run_tallyd = [&feed](const SettingsTable& s, std::vector<IngestResult>& results,
                                  EngineCounters& counters) {
    double best = 1e300;
    for (int rep = 0; rep < 5; ++rep) {
      Engine engine(s);
      results.clear();
      results.reserve(feed.size());
      const auto t0 = std::chrono::steady_clock::now();
      for (const Observation& o : feed) results.push_back(engine.ingest(o));
      best = std::min(best, std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count());
      counters = engine.counters();
    }
    return best;
  };
  std::vector<IngestResult> results, screened_results;
  EngineCounters counters, screened_counters;
  const double tallyd_seconds = run_tallyd(settings, results, counters);
  // The same work with the screen on (bounds/screen.h): records that provably
  // raise no alert skip the exact bounds, so only the alerts can be compared.
  SettingsTable screened_settings = settings;
  screened_settings.defaults.alert.screen = true;
  const double screened_seconds = run_tallyd(screened_settings, screened_results, screened_counters);
  // And with the refit cadence that tests/engine/refit_cadence_test.cc guards
  // (every 28th record, refit on doubt at 30 alpha, every record until the
  // window holds 60): a different computation, so its alerts are compared
  // with R's record by record as well.
  SettingsTable cadence_settings = screened_settings;
  ModelSpec& cm = cadence_settings.defaults.model;
  cm.refit_every = 28;
  cm.refit_on_doubt = true;
  cm.doubt_factor = 30;
  cm.cadence_from = 60;
  std::vector<IngestResult> cadence_results;
  EngineCounters cadence_counters;
  const double cadence_seconds = run_tallyd(cadence_settings, cadence_results, cadence_counters);

  // Design rows as the model builds them (origin = the series' first record).
  const std::string feed_path = a.dir + "/r_compare_feed.csv";
  const std::string result_path = a.dir + "/r_compare_r.csv";
  const std::string script_path = a.dir + "/r_compare.R";
  {
    std::ofstream out(feed_path);
    const int p = coefficient_count(m);
    out << "series,judged,count,offset,tlower,tupper";
    for (int j = 1; j <= p; ++j) out << ",x" << j;
    out << "\n";
    out.precision(17);
    Eigen::RowVectorXd x(p);
    for (std::size_t i = 0; i < feed.size(); ++i) {
      const Observation& o = feed[i];
      const double offset = design_row(m, DesignInput{o.time, start, o.exposure, nullptr}, x);
      const IngestResult& r = results[i];
      const bool judged = r.kind == IngestResult::Kind::judged;
      out << o.series << "," << (judged ? 1 : 0) << "," << o.count << "," << offset << ","
          << (judged ? r.prediction->bounds.lower : -1) << "," << (judged ? r.prediction->bounds.upper : -1);
      for (int j = 0; j < p; ++j) out << "," << x(j);
      out << "\n";
    }
    std::ofstream(script_path) << kRScript;
  }

  const std::string command = "Rscript --vanilla '" + script_path + "' '" + feed_path + "' '" + result_path + "' " +
                              std::to_string(a.window) + " " + std::to_string(a.alpha);
  const auto r0 = std::chrono::steady_clock::now();
  if (std::system(command.c_str()) != 0) {
    std::fprintf(stderr, "'%s' failed (is r-base-core installed?)\n", command.c_str());
    return 1;
  }
  const double r_wall = std::chrono::duration<double>(std::chrono::steady_clock::now() - r0).count();
  double r_seconds = 0;
  std::ifstream(result_path + ".seconds") >> r_seconds;

  // Compare record by record. Rows in the R output are 1-based feed rows.
  std::ifstream in(result_path);
  std::string line;
  std::getline(in, line);
  long compared = 0, lower_diff = 0, upper_diff = 0, alert_diff = 0, tallyd_alerts = 0, screened_alert_diff = 0;
  long cadence_alert_diff = 0;
  while (std::getline(in, line)) {
    std::stringstream ss(line);
    double row = 0, lower = 0, upper = 0;
    char comma = 0;
    ss >> row >> comma >> lower >> comma >> upper;
    const std::size_t i = static_cast<std::size_t>(row) - 1;
    const bounds::Bounds& b = results.at(i).prediction->bounds;
    const std::int64_t c = feed[i].count;
    const bool r_alert = c > static_cast<std::int64_t>(upper) || c < static_cast<std::int64_t>(lower);
    const bool t_alert = results[i].alert.has_value();
    ++compared;
    tallyd_alerts += t_alert ? 1 : 0;
    lower_diff += b.lower != static_cast<std::int64_t>(lower);
    upper_diff += b.upper != static_cast<std::int64_t>(upper);
    alert_diff += r_alert != t_alert;
    screened_alert_diff += r_alert != screened_results.at(i).alert.has_value();
    cadence_alert_diff += r_alert != cadence_results.at(i).alert.has_value();
  }
  const double judged = static_cast<double>(counters.judged);
  std::printf("feed: %d series x %d days = %zu records, %.0f judged; window %zu; alpha %g\n", a.series, a.days,
              feed.size(), judged, a.window, a.alpha);
  std::printf("%-28s %10s %14s\n", "", "seconds", "judged/s");
  std::printf("%-28s %10.3f %14.0f\n", "tallyd Engine (all records)", tallyd_seconds, judged / tallyd_seconds);
  std::printf("%-28s %10.3f %14.0f\n", "tallyd, screen on", screened_seconds, judged / screened_seconds);
  std::printf("%-28s %10.3f %14.0f\n", "tallyd, screen + cadence 28", cadence_seconds, judged / cadence_seconds);
  std::printf("%-28s %10.3f %14.0f\n", "R glm loop (judged only)", r_seconds, judged / r_seconds);
  std::printf("%-28s %10.3f\n", "Rscript wall incl. start-up", r_wall);
  std::printf("ratio R / tallyd: %.0fx (exact bounds on every record); %.0fx (screen on); %.0fx (screen, cadence 28 on doubt)\n",
              r_seconds / tallyd_seconds, r_seconds / screened_seconds, r_seconds / cadence_seconds);
  std::printf("compared %ld records: lower differs %ld, upper differs %ld, alert differs %ld (tallyd alerts %ld)\n",
              compared, lower_diff, upper_diff, alert_diff, tallyd_alerts);
  std::printf("screen on: alert differs %ld of %ld (judged %llu)\n", screened_alert_diff, compared,
              static_cast<unsigned long long>(screened_counters.judged));
  std::printf("screen + cadence 28 on doubt: alert differs %ld of %ld (judged %llu)\n", cadence_alert_diff, compared,
              static_cast<unsigned long long>(cadence_counters.judged));
  return compared == static_cast<long>(judged) && screened_counters.judged == counters.judged &&
                 cadence_counters.judged == counters.judged
             ? 0
             : 1;
}
