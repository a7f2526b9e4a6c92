// The pieces both checkpoint formats are made of (internal to checkpoint/):
// the marks, and the framing of format 5's checksummed sections.
#pragma once

#include <cstdint>
#include <string>
#include <string_view>

#include "checkpoint/checkpoint.h"
#include "core/result.h"
#include "core/state_codec.h"

namespace tallyd::checkpoint {

// "marks" and one "file" line per followed file (the same in formats 4 and 5).
void save_marks(StateWriter& w, const Marks& marks);
Marks load_marks(StateReader& r);

// XXH3 64-bit hash of `bytes` (libxxhash).
std::uint64_t section_checksum(std::string_view bytes);

// The line that opens a section: "<name> <bytes> <16 hex digits of the checksum>\n".
std::string section_line(std::string_view name, std::string_view bytes);

// What the line that opens a section says.
struct SectionLine {
  std::uint64_t bytes = 0;
  std::uint64_t checksum = 0;
};

// Parses the line that opens section `name`, `line` without its newline
// (npos-free). Errors as take_section's for a damaged line.
Result<SectionLine> parse_section_line(std::string_view line, std::string_view name, std::string_view file);

// Takes the section `name` (its line and its bytes) off the front of `rest`
// and returns its bytes once they match their checksum. Errors name `file`
// and say "truncated" when the text ends too soon, "corrupt" when the line or
// the bytes are damaged.
Result<std::string_view> take_section(std::string_view& rest, std::string_view name, std::string_view file);

// What follows the last section.
inline constexpr std::string_view kEndLine = "\nend\n";

// Nothing when `rest` (what follows the last section) is exactly kEndLine,
// else the error: truncated when it is a beginning of it, corrupt otherwise.
Status check_end(std::string_view rest, std::string_view file);

// The error for a section whose bytes do not match their checksum.
Error checksum_mismatch(std::string_view name, std::string_view file);

}  // namespace tallyd::checkpoint
