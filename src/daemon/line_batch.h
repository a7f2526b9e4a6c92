// LineBatch: decoded lines of one source, read together on the event-loop
// thread of `tallyd serve` and handed to the judging thread as one piece
// (daemon/handoff.h).
#pragma once

#include <optional>
#include <vector>

#include "checkpoint/checkpoint.h"
#include "daemon/intake.h"
#include "feed/parse_outcome.h"

namespace tallyd::daemon {

struct LineBatch {
  SourceFigures* figures = nullptr;  // the source, for its counts (written by the judging thread only)
  std::vector<ParseOutcome> lines;   // in the order read
  SteadyTime arrival{};              // when the first of their bytes was read
  // A followed file: where its reading stands after the last line of the
  // batch (FileFollower::mark). Once the batch is judged, this is what a
  // checkpoint records for the file.
  std::optional<checkpoint::FileMark> mark;
};

}  // namespace tallyd::daemon
