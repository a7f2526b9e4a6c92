#include "feed/utf8.h"

namespace tallyd {

std::size_t utf8_sequence_length(std::string_view text, std::size_t pos) {
  auto byte = [&](std::size_t i) { return static_cast<unsigned char>(text[i]); };
  const unsigned char b0 = byte(pos);
  if (b0 < 0x80) return 1;
  // The allowed range of the second byte depends on the first (RFC 3629 §4):
  // it is what excludes overlong forms, surrogates and code points > U+10FFFF.
  std::size_t length = 0;
  unsigned char lo = 0x80, hi = 0xBF;
  if (b0 >= 0xC2 && b0 <= 0xDF) {
    length = 2;
  } else if (b0 >= 0xE0 && b0 <= 0xEF) {
    length = 3;
    if (b0 == 0xE0) lo = 0xA0;
    if (b0 == 0xED) hi = 0x9F;
  } else if (b0 >= 0xF0 && b0 <= 0xF4) {
    length = 4;
    if (b0 == 0xF0) lo = 0x90;
    if (b0 == 0xF4) hi = 0x8F;
  } else {
    return 0;
  }
  if (pos + length > text.size()) return 0;
  const unsigned char b1 = byte(pos + 1);
  if (b1 < lo || b1 > hi) return 0;
  for (std::size_t i = 2; i < length; ++i) {
    const unsigned char b = byte(pos + i);
    if (b < 0x80 || b > 0xBF) return 0;
  }
  return length;
}

std::size_t utf8_error_offset(std::string_view text) {
  std::size_t pos = 0;
  while (pos < text.size()) {
    // ASCII runs are the common case; skip them without the table above.
    if (static_cast<unsigned char>(text[pos]) < 0x80) {
      ++pos;
      continue;
    }
    const std::size_t length = utf8_sequence_length(text, pos);
    if (length == 0) return pos;
    pos += length;
  }
  return std::string_view::npos;
}

}  // namespace tallyd
