#include "daemon/warn_limiter.h"

#include <spdlog/spdlog.h>

namespace tallyd::daemon {

void WarnLimiter::warn(const std::string& message) {
  const auto now = std::chrono::steady_clock::now();
  if (now - window_ >= std::chrono::seconds(1)) {
    if (suppressed_ > 0) spdlog::warn("{} more warnings not shown (all are counted)", suppressed_);
    window_ = now;
    shown_in_window_ = 0;
    suppressed_ = 0;
  }
  if (shown_in_window_ < per_second_) {
    ++shown_in_window_;
    spdlog::warn("{}", message);
  } else {
    ++suppressed_;
  }
}

}  // namespace tallyd::daemon
