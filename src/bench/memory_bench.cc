// Memory held per series (benchmark, not a test).
//
//   build/memory_bench [--series N] [--window W] [--extra E]
//
// Feeds N daily series (default 100,000) through one Engine until each holds
// a full window of W records (default 156) and has been fitted once, with 8
// coefficients (intercept, trend, two annual and one weekly harmonic
// pairs), then E more records per series (default 1) that are judged.
// Reports resident memory (Linux /proc/self/statm) before the engine exists
// and at the end, peak RSS (getrusage ru_maxrss), and both per series.
// refit_every = W, so each series is fitted once when its window is first
// full: the fit count, not the memory, is what this keeps small.
#include <sys/resource.h>
#include <unistd.h>

#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <string>

#include "bench/wide_model.h"
#include "bounds/random.h"
#include "engine/engine.h"
#include "series/design.h"

using namespace tallyd;

namespace {

double resident_kib() {
  std::ifstream statm("/proc/self/statm");
  long pages_total = 0, pages_resident = 0;
  statm >> pages_total >> pages_resident;
  return static_cast<double>(pages_resident) * static_cast<double>(sysconf(_SC_PAGESIZE)) / 1024.0;
}

double peak_kib() {
  rusage u{};
  getrusage(RUSAGE_SELF, &u);
  return static_cast<double>(u.ru_maxrss);  // KiB on Linux
}

}  // namespace

int main(int argc, char** argv) {
  long series = 100000;
  long window = 156;
  long extra = 1;
  for (int i = 1; i + 1 < argc; i += 2) {
    const std::string k = argv[i];
    const long v = std::strtol(argv[i + 1], nullptr, 10);
    if (k == "--series") series = v;
    else if (k == "--window") window = v;
    else if (k == "--extra") extra = v;
    else {
      std::fprintf(stderr, "unknown option %s\n", argv[i]);
      return 1;
    }
  }
  if (series < 1 || window < 10 || extra < 0) {
    std::fprintf(stderr, "need --series >= 1, --window >= 10, --extra >= 0\n");
    return 1;
  }

  const SettingsTable settings = bench::wide_model_settings(window);
  EngineLimits limits;
  limits.max_series = static_cast<std::size_t>(series);

  const double before = resident_kib();
  const auto t0 = std::chrono::steady_clock::now();
  std::uint64_t fits = 0;
  {
    Engine engine(settings, limits);
    bench::feed_daily(engine, series, window + extra);
    const double after = resident_kib();
    const double peak = peak_kib();
    for (const auto& [id, model] : engine.series()) fits += model->fits_done();
    const double secs = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
    std::printf("series %ld, window %ld records, %d coefficients, %llu fits, %llu judged, %.1f s\n", series, window,
                coefficient_count(settings.defaults.model), static_cast<unsigned long long>(fits),
                static_cast<unsigned long long>(engine.counters().judged), secs);
    std::printf("%-28s %12s %14s\n", "measure", "MiB", "KiB/series");
    std::printf("%-28s %12.1f %14s\n", "RSS before engine", before / 1024, "");
    std::printf("%-28s %12.1f %14.2f\n", "RSS with all series", after / 1024, (after - before) / series);
    std::printf("%-28s %12.1f %14.2f\n", "peak RSS (ru_maxrss)", peak / 1024, (peak - before) / series);
  }
  return 0;
}
