#include "tune/progress.h"

#include <fmt/format.h>
#include <unistd.h>

#include <cmath>

namespace tallyd::tune {

ProgressLine::ProgressLine(std::uint64_t expected_total, bool enabled, std::FILE* out)
    : expected_total_(expected_total), enabled_(enabled), out_(out),
      start_(std::chrono::steady_clock::now()), last_draw_(start_ - std::chrono::seconds(1)) {}  // first draw at once

ProgressLine::~ProgressLine() { clear(); }

bool ProgressLine::stderr_is_terminal() { return isatty(STDERR_FILENO) == 1; }

void ProgressLine::tick(const std::string& stage) {
  ++done_;
  if (!enabled_ || (done_ & 1023) != 0) return;  // read the clock once per 1024 records
  const auto now = std::chrono::steady_clock::now();
  if (now - last_draw_ < std::chrono::milliseconds(250)) return;
  last_draw_ = now;
  draw(stage);
}

void ProgressLine::draw(const std::string& stage) {
  const double elapsed = std::chrono::duration<double>(std::chrono::steady_clock::now() - start_).count();
  const double rate = elapsed > 0 ? static_cast<double>(done_) / elapsed : 0;
  std::string left;
  if (expected_total_ > done_ && rate > 0)
    left = ", about " + format_seconds_left(static_cast<double>(expected_total_ - done_) / rate) + " left";
  fmt::print(out_, "\r\x1b[K{}: {} records, {:.0f} records/s{}", stage, done_, rate, left);
  std::fflush(out_);
  drawn_ = true;
}

void ProgressLine::clear() {
  if (!drawn_) return;
  fmt::print(out_, "\r\x1b[K");
  std::fflush(out_);
  drawn_ = false;
}

std::string format_seconds_left(double seconds) {
  if (!(seconds >= 0) || !std::isfinite(seconds)) return "?";
  if (seconds < 60) return fmt::format("{:.1f} s", seconds);
  const auto s = static_cast<long long>(std::llround(seconds));
  if (s < 3600) return fmt::format("{} min {:02} s", s / 60, s % 60);
  return fmt::format("{} h {:02} min", s / 3600, (s % 3600) / 60);
}

}  // namespace tallyd::tune
