// Checkpoints: the service's durable state in one file, replaced atomically.
//
// File layout, format 5 (what this build writes):
//   line 1   "tallyd-checkpoint 5"                   format name and version
//   line 2   "head <bytes> <checksum>"               then <bytes> of text
//            (text layout of core/state_codec.h, readable with `less`):
//            "marks" (alert log length, write time, one "file" line per
//            followed file: identity, offset, line, CSV header) and
//            "counts" (series, records, held records; checked on reading)
//   next     "body <bytes> <checksum>"               then <bytes> of binary
//            (binary layout of core/state_codec.h: little-endian, LEB128
//            integers, doubles as their 8 IEEE-754 bytes): the whole engine
//            state of Engine::save_state (counters, the Benjamini-Hochberg
//            gate, records held for late arrivals, silence state, every
//            series' model, history, fit and detector state in id order,
//            the episodes)
//   last     "\nend\n"
// <checksum> is the XXH3 64-bit hash (libxxhash) of the section's bytes, as
// 16 lower-case hex digits. A section that does not match its checksum is
// refused as corrupt; a file that ends before "end" as truncated.
//
// Format 4 (written by tallyd before format 5) is still read: the marks and
// the same engine state, all text, closed by "seal <FNV-1a 64 hex> <bytes>".
// The next checkpoint after loading one is written as format 5.
// Any other first line is refused: older versions (2, 3) with a message
// saying it was written by another tallyd version (start once with --fresh
// after an upgrade), anything else as foreign. Nothing is restored unless the
// whole file checks out.
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
// silence state; 5: the same state as 4, the bulk in a binary section, each
// section with its checksum. 4 and 5 are read; any other first line, older
// versions included, is refused (see decode): their engine state lacks
// sections this build needs.
inline constexpr std::string_view kFirstLine = "tallyd-checkpoint 5";
inline constexpr std::string_view kFormat4Line = "tallyd-checkpoint 4";

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

// Bytes of a complete format-5 checkpoint file.
std::string encode(const Engine& engine, const Marks& marks);

// Bytes of a complete format-4 checkpoint (the all-text format of earlier
// tallyd versions), kept so that tests can check the upgrade path.
std::string encode_format4(const Engine& engine, const Marks& marks);

// Writes `encode(engine, marks)` to `path` atomically (see above), section
// by section without joining them. Errors name the path.
Status write_file(const std::string& path, const Engine& engine, const Marks& marks);

struct Restored {
  std::unique_ptr<Engine> engine;
  Marks marks;
};

// Decodes a format 5 or 4 checkpoint made for engines with `settings` (which
// must outlive the engine returned). Errors say what is wrong and where;
// `name` is used in them. `fdr` is the control across series the engine runs
// with (its pending step is in the file).
Result<Restored> decode(std::string_view text, std::string_view name, const SettingsTable& settings,
                        EngineLimits limits, detect::FdrSpec fdr = {});

// Reads `path`: the verdict of decode() on its bytes, reached by decoding
// the body as it is read in pieces (checkpoint/piecewise_read.h). nullopt
// when there is no file at all (a first start).
Result<std::optional<Restored>> read_file(const std::string& path, const SettingsTable& settings,
                                          EngineLimits limits, detect::FdrSpec fdr = {});

}  // namespace tallyd::checkpoint
