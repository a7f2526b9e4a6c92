// Checkpoints: the service's durable state in one file, replaced atomically.
//
// File layout (text, see core/state_codec.h for the token layout):
//   line 1   "tallyd-checkpoint 4"                  format name and version
//   body     "marks" section (alert log length, one line per followed file),
//            then the engine state (counters, records held for late arrivals,
//            silence state, every series' model and history, open episodes
//            and episode numbering)
//   last     "seal <16 hex digits> <body bytes>"    FNV-1a 64 of the body
// Any other first line is refused: older versions (2, 3) with a message
// saying it was written by another tallyd version (start once with --fresh
// after an upgrade), anything else as foreign; a missing or wrong seal is refused as truncated or
// corrupt. Nothing is restored unless the whole file checks out.
//
// Writing: to "<path>.tmp", fsync, rename over <path>, fsync the directory, so
// that after a crash at any moment <path> holds either the old or the new
// checkpoint, never a mixture.
#pragma once

#include <cstdint>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "core/result.h"
#include "engine/engine.h"

namespace tallyd::checkpoint {

// 2: detector and FDR state; 3: episodes; 4: held records (arrival hold) and
// silence state. Any other first line, older versions included, is refused
// (see decode): their engine state lacks sections this build needs.
inline constexpr std::string_view kFirstLine = "tallyd-checkpoint 4";

// Where one followed file had been read to: the byte after the last complete
// line handed to the engine.
struct FileMark {
  std::string path;
  std::uint64_t device = 0;  // st_dev and st_ino of the file that was open
  std::uint64_t inode = 0;
  std::uint64_t offset = 0;  // bytes consumed
  std::uint64_t line = 0;    // lines consumed (for messages)
  int format = -1;           // -1 not settled yet, 0 csv, 1 jsonl
  std::string header;        // the CSV header line, when format is csv
};

struct Marks {
  std::uint64_t alert_log_bytes = 0;  // length of the JSON Lines alert log at this checkpoint
  std::int64_t written_unix = 0;      // wall-clock time of writing, seconds since the epoch
  std::vector<FileMark> files;
};

// Text of a complete checkpoint file.
std::string encode(const Engine& engine, const Marks& marks);

// Writes `encode(engine, marks)` to `path` atomically (see above). Errors name the path.
Status write_file(const std::string& path, const Engine& engine, const Marks& marks);

struct Restored {
  std::unique_ptr<Engine> engine;
  Marks marks;
};

// Decodes a checkpoint made for engines with `settings` (which must outlive
// the engine returned). Errors say what is wrong and where; `name` is used in them.
// `fdr` is the control across series the engine runs with (its pending step is in the file).
Result<Restored> decode(std::string_view text, std::string_view name, const SettingsTable& settings,
                        EngineLimits limits, detect::FdrSpec fdr = {});

// Reads `path`. nullopt when there is no file at all (a first start).
Result<std::optional<Restored>> read_file(const std::string& path, const SettingsTable& settings,
                                          EngineLimits limits, detect::FdrSpec fdr = {});

}  // namespace tallyd::checkpoint
