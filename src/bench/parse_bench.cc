// CSV ingest speed against a plain line count of the same file, in the same
// run (benchmark, not a test).
//
//   build/parse_bench [--lines N] [--series S] [--repeat R] [--file PATH]
//
// Writes a CSV feed of N records (time,series,count,exposure; S series,
// one record per series per minute) to PATH (default: parse_bench.csv in
// the current directory, removed at the end), then times, R times each
// (best of R, file in the page cache after the first write):
//   wc -l < PATH            (coreutils, as a child process: includes spawning it)
//   FeedFile read of PATH   (every line parsed into an Observation)
// and prints seconds, lines/s and the ratio.
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <string>

#include "core/time.h"
#include "feed/feed_file.h"

using namespace tallyd;

namespace {

struct Args {
  long lines = 2000000;
  int series = 1000;
  int repeat = 3;
  std::string file = "parse_bench.csv";
};

Args parse_args(int argc, char** argv) {
  Args a;
  for (int i = 1; i + 1 < argc; i += 2) {
    const std::string k = argv[i];
    if (k == "--lines") a.lines = std::strtol(argv[i + 1], nullptr, 10);
    else if (k == "--series") a.series = static_cast<int>(std::strtol(argv[i + 1], nullptr, 10));
    else if (k == "--repeat") a.repeat = static_cast<int>(std::strtol(argv[i + 1], nullptr, 10));
    else if (k == "--file") a.file = argv[i + 1];
    else {
      std::fprintf(stderr, "unknown option %s\n", argv[i]);
      std::exit(1);
    }
  }
  if (a.lines < 1 || a.series < 1 || a.repeat < 1) {
    std::fprintf(stderr, "--lines, --series and --repeat must be at least 1\n");
    std::exit(1);
  }
  return a;
}

void write_feed(const Args& a) {
  std::FILE* f = std::fopen(a.file.c_str(), "w");
  if (!f) {
    std::perror(a.file.c_str());
    std::exit(1);
  }
  std::fputs("time,series,count,exposure\n", f);
  const TimePoint start = parse_time("2025-01-01T00:00:00Z").value();
  unsigned state = 12345;
  for (long i = 0; i < a.lines; ++i) {
    const long minute = i / a.series;
    state = state * 1103515245u + 12345u;  // an LCG is plenty for invented counts
    const std::string t = format_time(start + Seconds{minute * 60});
    std::fprintf(f, "%s,trap-%04ld,%u,%.1f\n", t.c_str(), i % a.series, (state >> 16) % 50, 1.0 + (state >> 8) % 10);
  }
  std::fclose(f);
}

double seconds_since(std::chrono::steady_clock::time_point t0) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
}

}  // namespace

int main(int argc, char** argv) {
  const Args a = parse_args(argc, argv);
  write_feed(a);

  double wc_best = 1e300, parse_best = 1e300;
  long wc_lines = 0, records = 0, refused = 0;
  const std::string command = "wc -l < '" + a.file + "'";
  for (int r = 0; r < a.repeat; ++r) {
    auto t0 = std::chrono::steady_clock::now();
    std::FILE* p = popen(command.c_str(), "r");
    if (!p || std::fscanf(p, "%ld", &wc_lines) != 1) {
      std::fprintf(stderr, "running '%s' failed\n", command.c_str());
      return 1;
    }
    pclose(p);
    wc_best = std::min(wc_best, seconds_since(t0));

    t0 = std::chrono::steady_clock::now();
    Result<FeedFile> feed = FeedFile::open(a.file, ReadOptions{});
    if (!feed) {
      std::fprintf(stderr, "%s\n", feed.error().message.c_str());
      return 1;
    }
    FeedItem item;
    records = refused = 0;
    while (feed->next(item)) ++(item.is_record() ? records : refused);
    parse_best = std::min(parse_best, seconds_since(t0));
  }
  std::remove(a.file.c_str());
  std::printf("file: %ld lines (wc -l), %ld records parsed, %ld refused; best of %d\n", wc_lines, records, refused,
              a.repeat);
  std::printf("%-10s %10s %14s\n", "reader", "seconds", "lines/s");
  std::printf("%-10s %10.3f %14.0f\n", "wc -l", wc_best, wc_lines / wc_best);
  std::printf("%-10s %10.3f %14.0f\n", "tallyd csv", parse_best, wc_lines / parse_best);
  std::printf("ratio tallyd / wc -l: %.1fx\n", parse_best / wc_best);
  return refused == 0 && records == a.lines ? 0 : 1;
}
