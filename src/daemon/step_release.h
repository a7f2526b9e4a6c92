// When `tallyd serve` releases the open time step of the control across
// series ([fdr]). Replay releases it when its feeds end (Engine::flush); a
// service never sees an end, so it needs a rule that does not cut a step
// while its records may still come:
//   - the wall clock is at least spec.release_delay past the step's end, so
//     records of the step that arrive late (a trap checked a day after the
//     step ended) are still in it; and
//   - no line has been read for spec.release_idle, so a backlog (a complete
//     file, a restart catching up) is read to its end first, and a step of
//     past times is released after the whole backlog, exactly where replay
//     would release it. (The judging thread also waits until no line read
//     is left in its queue: daemon/judge_thread.h.)
// A graceful stop does not release: the open step and its waiting records
// go into the checkpoint and the rule applies again after the restart.
#pragma once

#include <chrono>

#include "core/time.h"
#include "detect/fdr.h"

namespace tallyd::daemon {

// True when `state` has an open step and both conditions above hold at
// wall-clock `wall_now`, `since_last_line` being the time since the latest
// line was read (steady clock). Pure.
bool step_release_due(const detect::FdrState& state, const detect::FdrSpec& spec, TimePoint wall_now,
                      std::chrono::steady_clock::duration since_last_line);

// The end of step `step` (exclusive), in UTC: (step + 1) * spec.step.
TimePoint step_end(std::int64_t step, const detect::FdrSpec& spec);

}  // namespace tallyd::daemon
