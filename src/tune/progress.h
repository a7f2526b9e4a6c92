// A progress line for long replays: records/s and the time left, redrawn in
// place on stderr, only when stderr is a terminal (silent in pipes, files
// and tests). The clock is read here, in the outer layer only.
#pragma once

#include <chrono>
#include <cstdint>
#include <cstdio>
#include <string>

namespace tallyd::tune {

class ProgressLine {
 public:
  // `expected_total` = records expected over the whole run (an estimate; 0 =
  // unknown, then no time left is shown). `enabled` false = never draws.
  ProgressLine(std::uint64_t expected_total, bool enabled, std::FILE* out = stderr);
  ~ProgressLine();  // clears the line if one was drawn

  // Counts one more record; draws on the 1024th record, then at most four
  // times per second.
  void tick(const std::string& stage);

  // True when stderr is a terminal.
  static bool stderr_is_terminal();

 private:
  void draw(const std::string& stage);
  void clear();

  std::uint64_t expected_total_;
  bool enabled_;
  std::FILE* out_;
  std::uint64_t done_ = 0;
  bool drawn_ = false;
  std::chrono::steady_clock::time_point start_;
  std::chrono::steady_clock::time_point last_draw_;
};

// "4.2 s", "3 min 10 s", "1 h 05 min".
std::string format_seconds_left(double seconds);

}  // namespace tallyd::tune
