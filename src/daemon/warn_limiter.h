// WarnLimiter: logs warnings (spdlog) at most a few a second, then once a
// second the number not shown. For refusals and limits, which a bad sender
// can cause by the million: they are all counted elsewhere, this only keeps
// the log readable. Not thread-safe: one per thread (the loop thread and the
// judging thread of `tallyd serve` each have their own).
#pragma once

#include <chrono>
#include <cstdint>
#include <string>

namespace tallyd::daemon {

class WarnLimiter {
 public:
  explicit WarnLimiter(int per_second = 5) : per_second_(per_second) {}
  void warn(const std::string& message);

 private:
  int per_second_;
  std::chrono::steady_clock::time_point window_{};
  int shown_in_window_ = 0;
  std::uint64_t suppressed_ = 0;
};

}  // namespace tallyd::daemon
