// Cost of judging one record on a poorly identified fit (benchmark, not a test).
//
//   build/judge_cost_bench [--series N] [--window W] [--ahead D] [--repeat R] [--screen 0|1]
//                          [--limit L]
//
// Builds the memory and restore benchmarks' model (bench/wide_model.h:
// quasi-Poisson, trend, two annual and one weekly harmonic pairs) on N daily
// series (default 20) with a window of W records (default 156, so the annual
// terms rest on less than half a year and are barely identified), fitted
// once on a full window. Then, for every series, it takes the record D days
// after the last one fed (default 1; with refit_every = W a fit serves up to
// W days after its window, so D up to W is what a replay meets), a record (a count of 5 + series % 20, near the series' mean) and prints the
// predictor (eta mean and sd), the quadrature rule choose_rule picks, and the
// time of R calls of bounds::evaluate with the series' own options: the
// cost of judging that record, without the engine around it. Last, the
// largest and total time over the series. --limit sets
// alert.grid_node_limit (default 2048; 0: the earlier rule).
#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <string>

#include "bench/wide_model.h"
#include "bounds/mixture.h"
#include "bounds/predictive.h"
#include "engine/engine.h"

using namespace tallyd;

int main(int argc, char** argv) {
  long series = 20;
  long window = 156;
  long repeat = 3;
  long ahead = 1;
  bool screen = false;
  long limit = bounds::kDefaultGridNodeLimit;
  for (int i = 1; i + 1 < argc; i += 2) {
    const std::string k = argv[i];
    const long v = std::strtol(argv[i + 1], nullptr, 10);
    if (k == "--series") series = v;
    else if (k == "--window") window = v;
    else if (k == "--repeat") repeat = v;
    else if (k == "--ahead") ahead = v;
    else if (k == "--limit") limit = v;
    else if (k == "--screen") screen = v != 0;
    else {
      std::fprintf(stderr, "unknown option %s\n", argv[i]);
      return 1;
    }
  }
  if (series < 1 || window < 10 || repeat < 1 || ahead < 1) {
    std::fprintf(stderr, "need --series >= 1, --window >= 10, --ahead >= 1, --repeat >= 1\n");
    return 1;
  }
  const SettingsTable settings = bench::wide_model_settings(window);
  EngineLimits limits;
  limits.max_series = static_cast<std::size_t>(series);
  Engine engine(settings, limits);
  bench::feed_daily(engine, series, window + 1);

  const TimePoint next = parse_time("2024-01-01T06:00:00Z").value() + Seconds{(window + ahead) * 86400};
  bounds::Options options;
  options.method = bounds::Method::quadrature;
  options.alpha = settings.defaults.alert.alpha;
  options.quadrature_nodes = settings.defaults.alert.quadrature_nodes;
  options.screen = screen;
  options.grid_node_limit = static_cast<int>(limit);
  std::printf("%-6s %10s %10s %10s %8s %6s %10s %10s %10s %12s\n", "series", "eta_mean", "eta_sd", "rho", "nodes",
              "capped", "lower", "upper", "p_high", "ms/record");
  double worst = 0;
  double total = 0;
  for (long s = 0; s < series; ++s) {
    const std::string id = "s" + std::to_string(s);
    const SeriesModel* model = engine.find(id);
    if (model == nullptr || !model->ready()) {
      std::printf("%-6s not ready\n", id.c_str());
      continue;
    }
    Observation o;
    o.series = id;
    o.time = next;
    o.exposure = 1;
    o.count = 5 + s % 20;
    const Prediction p = model->predict(o);
    const bounds::QuadratureRule rule =
        bounds::choose_rule(p.predictor, p.noise, options.quadrature_nodes, options.alpha, options.grid_node_limit);
    bounds::Bounds b;
    const auto t0 = std::chrono::steady_clock::now();
    for (long r = 0; r < repeat; ++r) b = bounds::evaluate(p.predictor, p.noise, o.count, options, nullptr);
    const double ms =
        std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - t0).count() / static_cast<double>(repeat);
    worst = std::max(worst, ms);
    total += ms;
    std::printf("%-6s %10.3f %10.3f %10.1f %8d %6s %10lld %10lld %10.3g %12.3f\n", id.c_str(), p.predictor.eta_mean,
                std::sqrt(p.predictor.eta_variance), rule.rho, rule.grid ? rule.grid_nodes : rule.hermite_nodes,
                rule.grid_capped ? "yes" : "no", static_cast<long long>(b.lower), static_cast<long long>(b.upper),
                b.p_high, ms);
  }
  std::printf("worst %.3f ms/record, total %.3f ms over %ld series\n", worst, total, series);
  return 0;
}
