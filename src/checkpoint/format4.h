// Format 4, the all-text checkpoint of tallyd before format 5 (internal to
// checkpoint/; layout in checkpoint.h): read so that an upgrade keeps the
// series, written only for tests of that upgrade.
#pragma once

#include <string>
#include <string_view>

#include "checkpoint/checkpoint.h"

namespace tallyd::checkpoint {

// Everything after the first line: marks and engine state, then the seal line.
std::string format4_rest(const Engine& engine, const Marks& marks);

// Decodes everything after a format-4 first line; errors name `name`.
Result<Restored> decode_format4(std::string_view rest, std::string_view name, const SettingsTable& settings,
                                EngineLimits limits, detect::FdrSpec fdr);

}  // namespace tallyd::checkpoint
