// Checkpoint write and restore times (benchmark, not a test).
//
//   build/restore_bench [--series N] [--window W] [--dir DIR] [--keep 1]
//
// Builds an engine of N daily series (default 100,000), each with a full
// window of W records (default 156) fitted once, as memory_bench does
// (quasi-Poisson, 8 coefficients), then in one run times:
//   1. reading the checkpoint file's bytes into memory (the baseline: what
//      any restore must at least do; one read(2) into a buffer of the
//      file's size),
//   2. checkpoint::write_file (encode, write, fsync, rename),
//   3. checkpoint::read_file (read, check the checksums, decode every series),
// and prints seconds and the ratio of each to the baseline, plus the file
// size and its first line (the format version). Then it runs itself again
// with --restore-only 1 to time steps 1 and 3 in a fresh process, as at a
// service restart: there the heap is empty, while in this process it is
// full of the building's freed scratch. The restored engine is checked to hold the same series count and
// the same state text as the one written. With --keep 1 the file
// (DIR/restore_bench.checkpoint) is left in place, so that a profiler can run
// `restore_bench --restore-only 1` on it alone.
#include <fcntl.h>
#include <sys/resource.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <string>

#include "bench/wide_model.h"
#include "bounds/random.h"
#include "checkpoint/checkpoint.h"
#include "engine/engine.h"

using namespace tallyd;

namespace {

double seconds_since(std::chrono::steady_clock::time_point t0) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
}

// The file's bytes, with one read(2) into a buffer of its size; empty on failure.
std::string read_bytes(const std::string& path) {
  std::string bytes;
  const int fd = ::open(path.c_str(), O_RDONLY);
  struct stat st {};
  if (fd < 0 || ::fstat(fd, &st) != 0) return bytes;
  bytes.resize(static_cast<std::size_t>(st.st_size));
  std::size_t got = 0;
  while (got < bytes.size()) {
    const ssize_t n = ::read(fd, bytes.data() + got, bytes.size() - got);
    if (n <= 0) break;
    got += static_cast<std::size_t>(n);
  }
  ::close(fd);
  bytes.resize(got);
  return bytes;
}

// User plus system CPU seconds of this process so far: on a shared machine
// the wall-clock figures include waiting for a core.
double cpu_seconds() {
  struct rusage u {};
  ::getrusage(RUSAGE_SELF, &u);
  return static_cast<double>(u.ru_utime.tv_sec + u.ru_stime.tv_sec) +
         static_cast<double>(u.ru_utime.tv_usec + u.ru_stime.tv_usec) * 1e-6;
}

// Steps 1 and 3 on an existing file, in this (fresh) process.
int restore_only(const std::string& path, const SettingsTable& settings, EngineLimits limits) {
  const double cpu0 = cpu_seconds();
  auto t0 = std::chrono::steady_clock::now();
  const std::string bytes = read_bytes(path);
  const double read_s = seconds_since(t0);
  const double cpu1 = cpu_seconds();
  t0 = std::chrono::steady_clock::now();
  auto restored = checkpoint::read_file(path, settings, limits);
  const double restore_s = seconds_since(t0);
  const double cpu2 = cpu_seconds();
  if (bytes.empty() || !restored || !*restored) {
    std::fprintf(stderr, "fresh-process restore failed\n");
    return 1;
  }
  std::printf("%-40s %10.3f %10.2f\n", "fresh process: read the file's bytes", read_s, 1.0);
  std::printf("%-40s %10.3f %10.2f\n", "fresh process: read_file", restore_s, restore_s / read_s);
  std::printf("%-40s %10.3f %10.2f\n", "fresh process: read bytes, CPU seconds", cpu1 - cpu0, 1.0);
  std::printf("%-40s %10.3f %10.2f\n", "fresh process: read_file, CPU seconds", cpu2 - cpu1,
              (cpu2 - cpu1) / std::max(cpu1 - cpu0, 1e-6));
  std::printf("fresh process restored %zu series\n", (*restored)->engine->series_count());
  return 0;
}

}  // namespace

int main(int argc, char** argv) {
  long series = 100000;
  long window = 156;
  std::string dir = "/tmp";
  bool only_restore = false;
  bool keep = false;
  for (int i = 1; i + 1 < argc; i += 2) {
    const std::string k = argv[i];
    if (k == "--dir") {
      dir = argv[i + 1];
      continue;
    }
    const long v = std::strtol(argv[i + 1], nullptr, 10);
    if (k == "--series") series = v;
    else if (k == "--restore-only") only_restore = v != 0;
    else if (k == "--keep") keep = v != 0;
    else if (k == "--window") window = v;
    else {
      std::fprintf(stderr, "unknown option %s\n", argv[i]);
      return 1;
    }
  }
  if (series < 1 || window < 10) {
    std::fprintf(stderr, "need --series >= 1 and --window >= 10\n");
    return 1;
  }

  const SettingsTable settings = bench::wide_model_settings(window);
  EngineLimits limits;
  limits.max_series = static_cast<std::size_t>(series);
  const std::string path = dir + "/restore_bench.checkpoint";
  if (only_restore) return restore_only(path, settings, limits);

  const auto t_build = std::chrono::steady_clock::now();
  Engine engine(settings, limits);
  bench::feed_daily(engine, series, window + 1);
  std::printf("engine: %ld series, window %ld, built in %.1f s (not part of the figures)\n", series, window,
              seconds_since(t_build));

  checkpoint::Marks marks;
  auto t0 = std::chrono::steady_clock::now();
  const Status written = checkpoint::write_file(path, engine, marks);
  const double write_s = seconds_since(t0);
  if (!written) {
    std::fprintf(stderr, "write failed: %s\n", written.error().message.c_str());
    return 1;
  }

  t0 = std::chrono::steady_clock::now();
  const std::string bytes = read_bytes(path);
  const double read_s = seconds_since(t0);

  t0 = std::chrono::steady_clock::now();
  auto restored = checkpoint::read_file(path, settings, limits);
  const double restore_s = seconds_since(t0);
  if (!restored || !*restored) {
    std::fprintf(stderr, "restore failed: %s\n", restored ? "no file" : restored.error().message.c_str());
    return 1;
  }
  const Engine& back = *(*restored)->engine;
  const bool same = back.series_count() == engine.series_count() &&
                    checkpoint::encode(back, marks) == checkpoint::encode(engine, marks);

  std::printf("checkpoint file: %.1f MiB, first line '%s'\n", static_cast<double>(bytes.size()) / (1024.0 * 1024.0),
              bytes.substr(0, bytes.find('\n')).c_str());
  std::printf("%-40s %10s %10s\n", "step", "seconds", "ratio");
  std::printf("%-40s %10.3f %10.2f\n", "read the file's bytes (baseline)", read_s, 1.0);
  std::printf("%-40s %10.3f %10.2f\n", "write_file (encode, write, fsync)", write_s, write_s / read_s);
  std::printf("%-40s %10.3f %10.2f\n", "read_file (read, check sums, decode)", restore_s, restore_s / read_s);
  std::printf("restored engine %s the one written\n", same ? "encodes identically to" : "DIFFERS from");
  std::fflush(stdout);
  const std::string again = std::string(argv[0]) + " --restore-only 1 --series " + std::to_string(series) +
                            " --window " + std::to_string(window) + " --dir '" + dir + "'";
  const int child = std::system(again.c_str());
  if (!keep) std::remove(path.c_str());
  if (child != 0) return 1;
  return same ? 0 : 1;
}
