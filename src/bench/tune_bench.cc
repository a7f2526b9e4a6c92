// Tuning and report benchmark (not a test). On an in-memory daily feed:
//   1. baseline: one replay (Engine::ingest over every record);
//   2. the same replay keeping each judged record's p-values, then scoring
//      an alpha grid from them (what `tallyd tune` does per model setting);
//   3. rendering the HTML report of the replay (size and time).
// Prints seconds and the ratio of each to the baseline, measured in the same
// run (the machine is shared and noisy; only ratios are meaningful).
//
//   build/tune_bench [--series N] [--days D] [--alphas K] [--html FILE]
// --html writes the rendered report, e.g. to time a browser opening it.
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <string>
#include <vector>

#include "bounds/random.h"
#include "engine/engine.h"
#include "report/html_report.h"
#include "report/trace.h"
#include "tune/scoring.h"

using namespace tallyd;

namespace {

struct Args {
  int series = 1000;
  int days = 100;
  int alphas = 10;
  std::string html_path;
};

Args parse_args(int argc, char** argv) {
  Args a;
  for (int i = 1; i + 1 < argc; i += 2) {
    const std::string k = argv[i];
    const int v = static_cast<int>(std::strtol(argv[i + 1], nullptr, 10));
    if (k == "--html") a.html_path = argv[i + 1];
    else if (k == "--series") a.series = v;
    else if (k == "--days") a.days = v;
    else if (k == "--alphas") a.alphas = v;
    else {
      std::fprintf(stderr, "unknown option %s\n", argv[i]);
      std::exit(1);
    }
  }
  return a;
}

std::vector<Observation> make_feed(const Args& a) {
  std::vector<Observation> feed;
  bounds::Rng rng(777);
  const TimePoint start = parse_time("2024-01-01T06:00:00Z").value();
  for (int d = 0; d < a.days; ++d)
    for (int s = 0; s < a.series; ++s) {
      Observation o;
      o.series = "bench-" + std::to_string(s);
      o.time = start + Seconds{static_cast<std::int64_t>(d) * 86400};
      o.exposure = 0.5 + rng.uniform();
      o.count = rng.negbin(o.exposure * (5.0 + s % 20), 6.0);
      feed.push_back(std::move(o));
    }
  return feed;
}

double seconds_since(std::chrono::steady_clock::time_point t0) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
}

}  // namespace

int main(int argc, char** argv) {
  const Args a = parse_args(argc, argv);
  const std::vector<Observation> feed = make_feed(a);
  SettingsTable settings;
  settings.defaults.model.family = glm::Family::quasipoisson;
  settings.defaults.model.min_history = 20;
  std::printf("feed: %d series x %d days = %zu records; %d alphas\n", a.series, a.days, feed.size(), a.alphas);

  auto t0 = std::chrono::steady_clock::now();
  {
    Engine engine(settings);
    for (const Observation& o : feed) engine.ingest(o);
  }
  const double base = seconds_since(t0);
  std::printf("%-44s %8.2f s  ratio 1.00\n", "baseline: one replay", base);

  t0 = std::chrono::steady_clock::now();
  tune::JudgedLog log;
  report::TraceCollector traces;
  Engine engine(settings);
  std::uint32_t next_index = 0;
  std::vector<std::uint32_t> index_of(static_cast<std::size_t>(a.series), UINT32_MAX);
  for (const Observation& o : feed) {
    IngestResult r = engine.ingest(o);
    traces.add(o, r);
    if (r.kind != IngestResult::Kind::judged) continue;
    const auto s = static_cast<std::size_t>(std::stoi(o.series.substr(6)));
    if (index_of[s] == UINT32_MAX) {
      index_of[s] = next_index++;
      log.series_ids.push_back(o.series);
    }
    log.records.push_back({index_of[s], o.time, r.prediction->bounds.p_high, r.prediction->bounds.p_low, Direction::both});
  }
  std::uint64_t alerts = 0;
  for (int k = 0; k < a.alphas; ++k) alerts += tune::score_alpha(log, {}, std::pow(10.0, -2.0 - 3.0 * k / std::max(1, a.alphas - 1))).alerts;
  const double grid = seconds_since(t0);
  std::printf("%-44s %8.2f s  ratio %.2f  (%llu alerts over the grid)\n", "replay keeping p-values + trace, score grid",
              grid, grid / base, static_cast<unsigned long long>(alerts));

  t0 = std::chrono::steady_clock::now();
  report::ReportInput in;
  in.series = traces.finish(engine);
  const std::string html = report::render_report_html(in);
  const double render = seconds_since(t0);
  std::printf("%-44s %8.2f s  ratio %.2f  (%.1f MB, %zu series)\n", "render the HTML report", render, render / base,
              static_cast<double>(html.size()) / 1e6, in.series.size());
  if (!a.html_path.empty()) {
    std::FILE* f = std::fopen(a.html_path.c_str(), "wb");
    if (!f || std::fwrite(html.data(), 1, html.size(), f) != html.size() || std::fclose(f) != 0) {
      std::fprintf(stderr, "%s: cannot write the report\n", a.html_path.c_str());
      return 1;
    }
  }
  return 0;
}
