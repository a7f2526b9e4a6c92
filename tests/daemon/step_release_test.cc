#include "daemon/step_release.h"

#include <catch2/catch.hpp>

// The rule of docs/service.md ("[fdr] in the service"), checked on hand-made
// times: a step [k*step, (k+1)*step) is released only once the wall clock is
// release_delay past its end and no line has been read for release_idle.

using namespace tallyd;
using namespace std::chrono_literals;

TEST_CASE("the open time step is released only after its end plus the delay, and after the idle time",
          "[daemon][fdr]") {
  detect::FdrSpec spec;
  spec.enabled = true;
  spec.step = Seconds{7 * 86400};
  spec.release_delay = Seconds{86400};
  spec.release_idle = Seconds{60};
  detect::FdrState state;
  const TimePoint end = daemon::step_end(2900, spec);
  CHECK(end == TimePoint{Seconds{2901LL * 7 * 86400}});

  CHECK_FALSE(daemon::step_release_due(state, spec, end + Seconds{10 * 86400}, 1h));  // no open step

  state.open_step = 2900;
  CHECK_FALSE(daemon::step_release_due(state, spec, end, 1h));                        // the delay has not passed
  CHECK_FALSE(daemon::step_release_due(state, spec, end + Seconds{86399}, 1h));
  CHECK(daemon::step_release_due(state, spec, end + Seconds{86400}, 60s));             // both just met
  CHECK_FALSE(daemon::step_release_due(state, spec, end + Seconds{86400}, 59s));       // a line 59 s ago
  // A step of past times (a backlog being read) waits for the idle time only.
  CHECK_FALSE(daemon::step_release_due(state, spec, end + Seconds{400 * 86400}, 2s));
  CHECK(daemon::step_release_due(state, spec, end + Seconds{400 * 86400}, 61s));

  spec.enabled = false;
  CHECK_FALSE(daemon::step_release_due(state, spec, end + Seconds{400 * 86400}, 1h));
}

TEST_CASE("steps before 1970 end where floor division puts them", "[daemon][fdr]") {
  detect::FdrSpec spec;
  spec.enabled = true;
  spec.step = Seconds{100};
  CHECK(daemon::step_end(-1, spec) == TimePoint{Seconds{0}});
  CHECK(detect::step_of(TimePoint{Seconds{-1}}, spec.step) == -1);
}
