// UTF-8 well-formedness, for text that comes from feeds (series ids, column
// and member names) before it reaches logs, alert files and checkpoints.
#pragma once

#include <cstddef>
#include <string_view>

namespace tallyd {

// Offset of the first byte that does not start or continue a well-formed UTF-8
// sequence (RFC 3629: no overlong forms, no surrogates, nothing above
// U+10FFFF), or std::string_view::npos when all of `text` is well formed.
std::size_t utf8_error_offset(std::string_view text);

inline bool is_valid_utf8(std::string_view text) {
  return utf8_error_offset(text) == std::string_view::npos;
}

// Length in bytes of the well-formed sequence starting at `text[pos]`, or 0
// when none starts there. Precondition: pos < text.size().
std::size_t utf8_sequence_length(std::string_view text, std::size_t pos);

}  // namespace tallyd
