// Replay throughput benchmark (not a test): generates a multi-series daily
// feed in memory from a known seasonal negative-binomial model and times
// Engine::ingest over it, once per bounds method.
//
//   build/replay_bench [--series N] [--days D] [--window W] [--draws K] [--refit-every R]
//                      [--workers T] [--batch B] [--method quadrature|simulate|both] [--screen off|on|both]
//                      [--cadences 2,4,7] [--doubt off|on|both] [--annual-harmonics H]
//                      [--cadence-from N] [--doubt-factor F] [--feed-out FILE.csv]
//                      [--verdicts-save FILE] [--verdicts-against FILE] [--steps off|on]
//                      [--seed S] [--pvalues-out FILE.csv]
//
// Prints one row per method and screen setting: records, seconds,
// records/s, judged, alerts, and how many records' verdicts (no alert, high,
// low) differ from the first row of that method (screen off), which is the
// baseline of the ratio. With --cadences, the quadrature feed is also run at
// each refit cadence (with model.refit_on_doubt off, on, or both) and
// compared record by record with refit every record. With --refit-every R > 1
// and --doubt on, the first rows refit on doubt too (to profile one setting
// alone).
// With --workers T > 1 the series are sharded over T threads
// (engine/sharded_engine.h), fed in batches of one day of records (or of B
// records with --batch B); the row for T = 1 (plain Engine, one record at a
// time) is printed first in the same run, so the speed-up is a ratio
// measured side by side. The sharded row is followed by how long the workers
// were busy against how long the batches took: the rest is time spent
// waiting at the end of a batch for the slowest worker (or for a core).
// With --feed-out the generated feed is written as CSV (time in epoch
// seconds, series, count, exposure to 17 digits) and nothing is timed: two
// builds can then replay the same records with `tallyd replay` and their
// alert files be compared byte for byte.
// --verdicts-save writes the first row's per-record verdicts (one byte per
// record) and --verdicts-against compares every row with such a file, so the
// slow refit-every-record baseline of a long feed is run once and each
// cadence or setting after it is compared record by record in seconds (the
// file must come from the same --series, --days and --window).
// --steps on sets model.step_between_refits in every row (a Newton step per
// record between full refits; series/window_step.h).
// --seed sets alert.seed (default 1), the seed of simulate's draws: two
// seeds show how many verdicts Monte Carlo error alone moves.
// --pvalues-out writes, after the first row's timed run, one CSV line per
// record that some run could judge near alpha: the verdict and p-values the
// run reported ("s": screened, floors) and the p-values by
// quadrature of the same predictor (screen on, so a record it settles shows
// floors). Collecting them costs a copy of each prediction inside the timed loop.
#include <algorithm>
#include <array>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <optional>
#include <string>
#include <vector>

#include "bounds/random.h"
#include "engine/engine.h"
#include "engine/sharded_engine.h"

using namespace tallyd;

namespace {

struct Args {
  int series = 1000;
  int days = 200;
  std::size_t window = 365;
  int draws = 10000;
  std::size_t refit_every = 1;
  std::size_t cadence_from = 0;  // model.cadence_from of every row
  double doubt_factor = 10;      // model.doubt_factor of every row
  bool steps = false;            // model.step_between_refits of every row
  int workers = 1;
  int batch = 0;  // records per sharded batch; 0: one day (--series records)
  int annual_harmonics = 1;  // coefficients: intercept, trend, 2 per annual harmonic, 2 weekly
  std::string method = "both";
  std::string screen = "off";
  std::string doubt = "both";
  std::string feed_out;
  std::string verdicts_save;
  std::string verdicts_against;
  std::string pvalues_out;
  std::uint64_t seed = 1;
  std::vector<std::size_t> cadences;
};

Args parse_args(int argc, char** argv) {
  Args a;
  for (int i = 1; i + 1 < argc; i += 2) {
    const std::string k = argv[i];
    if (k == "--method") {
      a.method = argv[i + 1];
      if (a.method != "both" && !bounds::parse_method(a.method)) {
        std::fprintf(stderr, "--method must be quadrature, simulate or both\n");
        std::exit(1);
      }
      continue;
    }
    if (k == "--screen") {
      a.screen = argv[i + 1];
      if (a.screen != "off" && a.screen != "on" && a.screen != "both") {
        std::fprintf(stderr, "--screen must be off, on or both\n");
        std::exit(1);
      }
      continue;
    }
    if (k == "--doubt") {
      a.doubt = argv[i + 1];
      if (a.doubt != "off" && a.doubt != "on" && a.doubt != "both") {
        std::fprintf(stderr, "--doubt must be off, on or both\n");
        std::exit(1);
      }
      continue;
    }
    if (k == "--feed-out") {
      a.feed_out = argv[i + 1];
      continue;
    }
    if (k == "--steps") {
      const std::string v = argv[i + 1];
      if (v != "on" && v != "off") {
        std::fprintf(stderr, "--steps must be on or off\n");
        std::exit(1);
      }
      a.steps = v == "on";
      continue;
    }
    if (k == "--verdicts-save") {
      a.verdicts_save = argv[i + 1];
      continue;
    }
    if (k == "--verdicts-against") {
      a.verdicts_against = argv[i + 1];
      continue;
    }
    if (k == "--pvalues-out") {
      a.pvalues_out = argv[i + 1];
      continue;
    }
    if (k == "--seed") {
      a.seed = std::strtoull(argv[i + 1], nullptr, 10);
      continue;
    }
    if (k == "--cadences") {
      for (const char* c = argv[i + 1]; *c != 0;) {
        char* end = nullptr;
        const long v = std::strtol(c, &end, 10);
        if (end == c || v < 1) {
          std::fprintf(stderr, "--cadences wants a comma-separated list of positive integers\n");
          std::exit(1);
        }
        a.cadences.push_back(static_cast<std::size_t>(v));
        c = *end == ',' ? end + 1 : end;
      }
      continue;
    }
    const long v = std::strtol(argv[i + 1], nullptr, 10);
    if (k == "--series") a.series = static_cast<int>(v);
    else if (k == "--days") a.days = static_cast<int>(v);
    else if (k == "--window") a.window = static_cast<std::size_t>(v);
    else if (k == "--draws") a.draws = static_cast<int>(v);
    else if (k == "--workers") a.workers = static_cast<int>(v);
    else if (k == "--batch") a.batch = static_cast<int>(v);
    else if (k == "--refit-every") a.refit_every = static_cast<std::size_t>(v);
    else if (k == "--cadence-from") a.cadence_from = static_cast<std::size_t>(v);
    else if (k == "--doubt-factor") a.doubt_factor = static_cast<double>(v);
    else if (k == "--annual-harmonics") a.annual_harmonics = static_cast<int>(v);
    else {
      std::fprintf(stderr, "unknown option %s\n", argv[i]);
      std::exit(1);
    }
  }
  return a;
}

// Records in time order (day by day, all series each day), like a merged feed.
std::vector<Observation> make_feed(const Args& a) {
  std::vector<Observation> feed;
  feed.reserve(static_cast<std::size_t>(a.series) * a.days);
  bounds::Rng rng(12345);
  std::vector<double> level(a.series);
  for (double& l : level) l = std::log(2.0 + 40.0 * rng.uniform());
  const TimePoint start = parse_time("2023-01-01T06:00:00Z").value();
  for (int d = 0; d < a.days; ++d) {
    for (int s = 0; s < a.series; ++s) {
      Observation o;
      o.series = "bench-" + std::to_string(s);
      o.time = start + Seconds{static_cast<std::int64_t>(d) * 86400};
      o.exposure = 0.5 + rng.uniform();
      const double yr = 2 * M_PI * d / 365.25, wk = 2 * M_PI * d / 7.0;
      const double mu = o.exposure * std::exp(level[s] + 0.002 * d / 365.25 + 0.5 * std::sin(yr) + 0.2 * std::cos(wk));
      o.count = rng.negbin(mu, 5.0);
      feed.push_back(std::move(o));
    }
  }
  return feed;
}

bool write_feed(const std::vector<Observation>& feed, const std::string& path) {
  std::FILE* f = std::fopen(path.c_str(), "w");
  if (f == nullptr) {
    std::fprintf(stderr, "cannot write %s\n", path.c_str());
    return false;
  }
  std::fprintf(f, "time,series,count,exposure\n");
  for (const Observation& o : feed) {
    std::fprintf(f, "%lld,%s,%lld,%.17g\n", static_cast<long long>(o.time.time_since_epoch().count()),
                 o.series.c_str(), static_cast<long long>(o.count), o.exposure);
  }
  const bool ok = std::fclose(f) == 0;
  if (!ok) std::fprintf(stderr, "cannot write %s\n", path.c_str());
  return ok;
}

SettingsTable bench_settings(const Args& a, bounds::Method method, bool screen, std::size_t refit_every,
                             bool doubt = false) {
  SettingsTable t;
  ModelSpec& m = t.defaults.model;
  m.family = glm::Family::quasipoisson;
  m.link = glm::Link::log;
  m.trend = true;
  m.seasons = {Season{Seconds{31557600}, a.annual_harmonics}, Season{Seconds{7 * 86400}, 1}};
  m.window = Window{std::nullopt, a.window};
  m.min_history = 30;
  m.refit_every = refit_every;
  m.refit_on_doubt = doubt;
  m.cadence_from = a.cadence_from;
  m.doubt_factor = a.doubt_factor;
  m.step_between_refits = a.steps;
  t.defaults.alert.method = method;
  t.defaults.alert.draws = a.draws;
  t.defaults.alert.alpha = 0.001;
  t.defaults.alert.screen = screen;
  t.defaults.alert.seed = a.seed;
  return t;
}

struct Row {
  double seconds;
  EngineCounters counters;
  std::vector<signed char> verdicts;  // per record: 0 none, 1 high, -1 low (bound alerts), 2 not judged
  double busy_seconds = 0;     // sharded: seconds the workers spent judging, summed
  double offered_seconds = 0;  // sharded: seconds in batches times workers
  std::uint64_t fits = 0;      // single: GLM fits done (a refit with the resistant second fit counts two)
  std::array<std::uint64_t, kRefitCauses> fits_by_cause{};  // single: the same fits by the refit's cause
  std::uint64_t recentred = 0;  // single: step sums taken again at the step's coefficients
  std::vector<Prediction> predictions;  // with --pvalues-out: per record (not judged: eta_mean NaN)
};

Row run_single(const std::vector<Observation>& feed, const SettingsTable& settings, bool keep = false) {
  Engine engine(settings);
  Row row{0, {}, {}, 0, 0};
  row.verdicts.resize(feed.size());
  if (keep) row.predictions.resize(feed.size(), Prediction{{std::nan(""), 0}, {}, {}});
  const auto t0 = std::chrono::steady_clock::now();
  for (std::size_t i = 0; i < feed.size(); ++i) {
    const IngestResult r = engine.ingest(feed[i]);
    row.verdicts[i] = !r.prediction ? 2 : !r.alert ? 0 : r.alert->side == AlertSide::high ? 1 : -1;
    if (keep && r.prediction) row.predictions[i] = *r.prediction;
  }
  row.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  row.counters = engine.counters();
  for (const auto& [id, model] : engine.series()) {
    row.fits += model->fits_done();
    for (std::size_t c = 0; c < kRefitCauses; ++c) row.fits_by_cause[c] += model->fits_for(static_cast<RefitCause>(c));
    row.recentred += model->steps_recentred();
  }
  return row;
}

bool save_verdicts(const Row& r, const std::string& path) {
  std::FILE* f = std::fopen(path.c_str(), "wb");
  if (f == nullptr) return false;
  const bool ok = std::fwrite(r.verdicts.data(), 1, r.verdicts.size(), f) == r.verdicts.size();
  return std::fclose(f) == 0 && ok;
}

std::optional<Row> load_verdicts(const std::string& path, std::size_t records) {
  std::FILE* f = std::fopen(path.c_str(), "rb");
  if (f == nullptr) return std::nullopt;
  Row r{0, {}, {}, 0, 0};
  r.verdicts.resize(records);
  const bool ok = std::fread(r.verdicts.data(), 1, records, f) == records && std::fgetc(f) == EOF;
  std::fclose(f);
  if (!ok) return std::nullopt;
  return r;
}

// --pvalues-out: records whose reported p-values are not both above 0.05
// (every record that alerts in one run and not in another is among them,
// unless a verdict changed from afar), with quadrature's p-values beside.
bool write_pvalues(const std::vector<Observation>& feed, const Row& r, double alpha, const std::string& path) {
  std::FILE* f = std::fopen(path.c_str(), "w");
  if (f == nullptr) return false;
  std::fprintf(f, "record,verdict,p_high,p_low,kind,quad_p_high,quad_p_low,eta_mean,eta_variance,dispersion,count\n");
  bounds::Options q;
  q.method = bounds::Method::quadrature;
  q.alpha = alpha;
  q.screen = true;
  for (std::size_t i = 0; i < r.predictions.size(); ++i) {
    const Prediction& p = r.predictions[i];
    if (std::isnan(p.predictor.eta_mean) || (p.bounds.p_high > 0.05 && p.bounds.p_low > 0.05)) continue;
    const bounds::Bounds e = bounds::evaluate(p.predictor, p.noise, feed[i].count, q, nullptr);
    std::fprintf(f, "%zu,%d,%.6g,%.6g,%s,%.6g,%.6g,%.17g,%.17g,%.17g,%lld\n", i, r.verdicts[i], p.bounds.p_high,
                 p.bounds.p_low, p.bounds.screened ? "s" : "-", e.p_high, e.p_low, p.predictor.eta_mean,
                 p.predictor.eta_variance, p.noise.dispersion, static_cast<long long>(feed[i].count));
  }
  return std::fclose(f) == 0;
}

std::size_t differing(const Row& a, const Row& b) {
  std::size_t n = 0;
  for (std::size_t i = 0; i < a.verdicts.size() && i < b.verdicts.size(); ++i) n += a.verdicts[i] != b.verdicts[i];
  return n;
}

Row run_sharded(const std::vector<Observation>& feed, const SettingsTable& settings, int workers,
                std::size_t batch_records) {
  ShardedEngine engine(settings, workers);
  double seconds = 0;
  std::vector<Observation> batch;
  for (std::size_t from = 0; from < feed.size(); from += batch_records) {
    // Copying the batch out is not timed: a service hands out its own buffers.
    const std::size_t to = std::min(feed.size(), from + batch_records);
    batch.assign(feed.begin() + static_cast<long>(from), feed.begin() + static_cast<long>(to));
    const auto t0 = std::chrono::steady_clock::now();
    engine.ingest_batch(batch);
    seconds += std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  }
  Row row{seconds, engine.counters(), {}};
  for (const double b : engine.worker_busy_seconds()) row.busy_seconds += b;
  row.offered_seconds = engine.batch_seconds() * workers;
  return row;
}

// `base` is the first row of the method in this run (refit every record,
// screen off): the ratio and the verdict differences are against it.
void print_row(const char* method, const char* screen, std::size_t every, int workers, std::size_t records,
               const Row& r, const Row& base) {
  const std::string diff = r.verdicts.empty() ? std::string("-") : std::to_string(differing(r, base));
  std::printf("%-11s %6s %5zu %7d %10zu %10.2f %12.0f %7.2f %10llu %8llu %8s\n", method, screen, every, workers,
              records, r.seconds, static_cast<double>(records) / r.seconds, base.seconds / r.seconds,
              static_cast<unsigned long long>(r.counters.judged),
              static_cast<unsigned long long>(r.counters.alerts_high + r.counters.alerts_low), diff.c_str());
}

// Where a single row's fits came from, per record of the feed.
void print_fit_causes(const Row& r, std::size_t records) {
  static constexpr const char* kNames[kRefitCauses] = {"asked", "first", "warm-up", "cadence",
                                                       "no sums", "step limit", "doubt"};
  const double n = static_cast<double>(records);
  std::printf("  fits per record %.4f:", static_cast<double>(r.fits) / n);
  for (std::size_t c = 0; c < kRefitCauses; ++c)
    if (r.fits_by_cause[c] > 0) std::printf(" %s %.4f", kNames[c], static_cast<double>(r.fits_by_cause[c]) / n);
  std::printf("; recentred %.4f\n", static_cast<double>(r.recentred) / n);
}

// With --verdicts-against: how many records' verdicts differ from the file's
// run, and how many alerts each has; fits per record of this run.
void report_against(const Args& a, const Row& r, std::size_t records) {
  if (a.verdicts_against.empty()) return;
  const std::optional<Row> ref = load_verdicts(a.verdicts_against, records);
  if (!ref) {
    std::printf("  %s: cannot read %zu verdicts from it\n", a.verdicts_against.c_str(), records);
    return;
  }
  std::size_t ref_alerts = 0, alerts = 0, lost = 0, gained = 0;
  for (std::size_t i = 0; i < records; ++i) {
    const bool x = ref->verdicts[i] == 1 || ref->verdicts[i] == -1;
    const bool y = r.verdicts[i] == 1 || r.verdicts[i] == -1;
    ref_alerts += x;
    alerts += y;
    lost += x && !y;
    gained += y && !x;
  }
  std::printf("  against %s: %zu records differ (%zu alerts lost, %zu gained; %zu alerts there, %zu here);"
              " %.3f fits per record\n",
              a.verdicts_against.c_str(), differing(r, *ref), lost, gained, ref_alerts, alerts,
              static_cast<double>(r.fits) / static_cast<double>(records));
}

}  // namespace

int main(int argc, char** argv) {
  const Args a = parse_args(argc, argv);
  const std::vector<Observation> feed = make_feed(a);
  if (!a.feed_out.empty()) return write_feed(feed, a.feed_out) ? 0 : 1;
  std::printf("feed: %d series x %d days = %zu records; window %zu records; %d coefficients; draws %d\n", a.series,
              a.days, feed.size(), a.window, 4 + 2 * a.annual_harmonics, a.draws);
  std::printf("%-11s %6s %5s %7s %10s %10s %12s %7s %10s %8s %8s\n", "method", "screen", "refit", "threads",
              "records", "seconds", "records/s", "ratio", "judged", "alerts", "differ");
  for (bounds::Method method : {bounds::Method::quadrature, bounds::Method::simulate}) {
    if (a.method != "both" && bounds::parse_method(a.method) != method) continue;
    const std::string name(bounds::to_string(method));
    std::vector<bool> screens;
    if (a.screen != "on") screens.push_back(false);
    if (a.screen != "off") screens.push_back(true);
    std::optional<Row> base;
    for (bool screen : screens) {
      const SettingsTable settings =
          bench_settings(a, method, screen, a.refit_every, a.refit_every > 1 && a.doubt == "on");
      const Row one = run_single(feed, settings, !base && !a.pvalues_out.empty());
      if (!base) {
        if (!one.predictions.empty() && !write_pvalues(feed, one, settings.defaults.alert.alpha, a.pvalues_out)) {
          std::fprintf(stderr, "cannot write %s\n", a.pvalues_out.c_str());
          return 1;
        }
        base = one;
        if (!a.verdicts_save.empty() && !save_verdicts(one, a.verdicts_save)) {
          std::fprintf(stderr, "cannot write %s\n", a.verdicts_save.c_str());
          return 1;
        }
      }
      print_row(name.c_str(), screen ? "on" : "off", a.refit_every, 1, feed.size(), one, *base);
      print_fit_causes(one, feed.size());
      report_against(a, one, feed.size());
      if (a.workers > 1) {
        const std::size_t batch = static_cast<std::size_t>(std::max(a.batch > 0 ? a.batch : a.series, 1));
        const Row many = run_sharded(feed, settings, a.workers, batch);
        print_row(name.c_str(), screen ? "on" : "off", a.refit_every, a.workers, feed.size(), many, *base);
        std::printf("  %d workers busy %.2f s of %.2f s in batches of %zu: %.1f%% waiting for the slowest worker or a core\n",
                    a.workers, many.busy_seconds, many.offered_seconds, batch,
                    100.0 * (many.offered_seconds - many.busy_seconds) / many.offered_seconds);
        std::printf("speed-up %d threads / 1: %.2fx; alerts %s\n", a.workers, one.seconds / many.seconds,
                    one.counters.alerts_high == many.counters.alerts_high &&
                            one.counters.alerts_low == many.counters.alerts_low
                        ? "identical counts"
                        : "DIFFER");
      }
    }
    if (method != bounds::Method::quadrature) continue;
    for (std::size_t every : a.cadences) {
      for (bool doubt : {false, true}) {
        if ((doubt && a.doubt == "off") || (!doubt && a.doubt == "on")) continue;
        const SettingsTable settings = bench_settings(a, method, screens.back(), every, doubt);
        const Row r = run_single(feed, settings);
        print_row(name.c_str(), screens.back() ? "on" : "off", every, 1, feed.size(), r, *base);
        print_fit_causes(r, feed.size());
        report_against(a, r, feed.size());
        std::printf("  refit every %zu%s: %zu of %llu judged records (%.4f%%) differ from refit every %zu;"
                    " %.3f fits per record (%.3f there)\n",
                    every, doubt ? " on doubt" : "", differing(r, *base),
                    static_cast<unsigned long long>(base->counters.judged),
                    100.0 * static_cast<double>(differing(r, *base)) / static_cast<double>(base->counters.judged),
                    a.refit_every, static_cast<double>(r.fits) / static_cast<double>(feed.size()),
                    static_cast<double>(base->fits) / static_cast<double>(feed.size()));
      }
    }
  }
  return 0;
}
