// Replay throughput benchmark (not a test): generates a multi-series daily
// feed in memory from a known seasonal negative-binomial model and times
// Engine::ingest over it, once per bounds method.
//
//   build/replay_bench [--series N] [--days D] [--window W] [--draws K] [--refit-every R]
//                      [--workers T] [--method quadrature|simulate|both]
//
// Prints one row per method: records, seconds, records/s, judged, alerts.
// With --workers T > 1 the series are sharded over T threads
// (engine/sharded_engine.h), fed in batches of one day of records; the row
// for T = 1 (plain Engine, one record at a time) is printed first in the
// same run, so the speed-up is a ratio measured side by side.
#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <cstring>
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
  int workers = 1;
  std::string method = "both";
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
    const long v = std::strtol(argv[i + 1], nullptr, 10);
    if (k == "--series") a.series = static_cast<int>(v);
    else if (k == "--days") a.days = static_cast<int>(v);
    else if (k == "--window") a.window = static_cast<std::size_t>(v);
    else if (k == "--draws") a.draws = static_cast<int>(v);
    else if (k == "--workers") a.workers = static_cast<int>(v);
    else if (k == "--refit-every") a.refit_every = static_cast<std::size_t>(v);
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

SettingsTable bench_settings(const Args& a, bounds::Method method) {
  SettingsTable t;
  ModelSpec& m = t.defaults.model;
  m.family = glm::Family::quasipoisson;
  m.link = glm::Link::log;
  m.trend = true;
  m.seasons = {Season{Seconds{31557600}, 1}, Season{Seconds{7 * 86400}, 1}};
  m.window = Window{std::nullopt, a.window};
  m.min_history = 30;
  m.refit_every = a.refit_every;
  t.defaults.alert.method = method;
  t.defaults.alert.draws = a.draws;
  t.defaults.alert.alpha = 0.001;
  return t;
}

struct Row {
  double seconds;
  EngineCounters counters;
};

Row run_single(const std::vector<Observation>& feed, const SettingsTable& settings) {
  Engine engine(settings);
  const auto t0 = std::chrono::steady_clock::now();
  for (const Observation& o : feed) engine.ingest(o);
  return {std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count(), engine.counters()};
}

Row run_sharded(const std::vector<Observation>& feed, const SettingsTable& settings, int workers, int series) {
  ShardedEngine engine(settings, workers);
  double seconds = 0;
  std::vector<Observation> batch;
  for (std::size_t from = 0; from < feed.size(); from += static_cast<std::size_t>(series)) {
    // Copying the batch out is not timed: a service hands out its own buffers.
    const std::size_t to = std::min(feed.size(), from + static_cast<std::size_t>(series));
    batch.assign(feed.begin() + static_cast<long>(from), feed.begin() + static_cast<long>(to));
    const auto t0 = std::chrono::steady_clock::now();
    engine.ingest_batch(batch);
    seconds += std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  }
  return {seconds, engine.counters()};
}

void print_row(const char* method, int workers, std::size_t records, const Row& r) {
  std::printf("%-11s %7d %10zu %10.2f %12.0f %10llu %8llu\n", method, workers, records, r.seconds,
              static_cast<double>(records) / r.seconds, static_cast<unsigned long long>(r.counters.judged),
              static_cast<unsigned long long>(r.counters.alerts_high + r.counters.alerts_low));
}

}  // namespace

int main(int argc, char** argv) {
  const Args a = parse_args(argc, argv);
  const std::vector<Observation> feed = make_feed(a);
  std::printf("feed: %d series x %d days = %zu records; window %zu records; refit every %zu; draws %d\n", a.series,
              a.days, feed.size(), a.window, a.refit_every, a.draws);
  std::printf("%-11s %7s %10s %10s %12s %10s %8s\n", "method", "threads", "records", "seconds", "records/s", "judged",
              "alerts");
  for (bounds::Method method : {bounds::Method::quadrature, bounds::Method::simulate}) {
    if (a.method != "both" && bounds::parse_method(a.method) != method) continue;
    const SettingsTable settings = bench_settings(a, method);
    const std::string name(bounds::to_string(method));
    const Row one = run_single(feed, settings);
    print_row(name.c_str(), 1, feed.size(), one);
    if (a.workers > 1) {
      const Row many = run_sharded(feed, settings, a.workers, a.series);
      print_row(name.c_str(), a.workers, feed.size(), many);
      std::printf("speed-up %d threads / 1: %.2fx; alerts %s\n", a.workers, one.seconds / many.seconds,
                  one.counters.alerts_high == many.counters.alerts_high &&
                          one.counters.alerts_low == many.counters.alerts_low
                      ? "identical counts"
                      : "DIFFER");
    }
  }
  return 0;
}
