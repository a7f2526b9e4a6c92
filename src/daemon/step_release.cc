#include "daemon/step_release.h"

namespace tallyd::daemon {

TimePoint step_end(std::int64_t step, const detect::FdrSpec& spec) {
  return TimePoint{Seconds{(step + 1) * spec.step.count()}};
}

bool step_release_due(const detect::FdrState& state, const detect::FdrSpec& spec, TimePoint wall_now,
                      std::chrono::steady_clock::duration since_last_line) {
  if (!spec.enabled || !state.open_step) return false;
  if (wall_now < step_end(*state.open_step, spec) + spec.release_delay) return false;
  return since_last_line >= spec.release_idle;
}

}  // namespace tallyd::daemon
