// The two halves of restoring a format-5 checkpoint (internal to
// checkpoint/), shared by decode (the whole file in memory) and read_file
// (the body read in pieces, checkpoint/piecewise_read.h).
#pragma once

#include <cstdint>
#include <string_view>

#include "checkpoint/checkpoint.h"
#include "core/result.h"
#include "core/state_codec.h"

namespace tallyd::checkpoint {

// What the head section says: the marks and the counts the body must match.
struct Head {
  Marks marks;
  std::uint64_t series = 0;
  std::uint64_t records = 0;
  std::uint64_t held = 0;
};

// Reads the head section's bytes (their checksum already matched). Errors
// name `name` and say the file does not match this build or config.
Result<Head> read_head(std::string_view head_bytes, std::string_view name);

// Restores the engine from `body` (a binary reader of the body section's
// `body_size` bytes) and checks it against `head`: the body must end
// exactly with the engine state and hold the counts the head says. Errors
// as read_head's.
Result<Restored> restore_body(StateReader& body, std::size_t body_size, Head head, std::string_view name,
                              const SettingsTable& settings, EngineLimits limits, detect::FdrSpec fdr);

}  // namespace tallyd::checkpoint
