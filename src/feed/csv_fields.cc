#include "feed/csv_fields.h"

#include <algorithm>
#include <bit>
#include <cstdint>
#include <cstring>

#include "feed/field_check.h"

namespace tallyd {
namespace {

bool is_blank(char c) { return c == ' ' || c == '\t'; }

// The commas among the n <= 8 bytes at p, read as one little-endian word
// (byte i in bits 8i..8i+7): the high bit of each byte that is ','. Exact:
// the sum below stays within each byte, so no carry crosses into the next
// (the usual "which bytes are zero" word trick, applied to text ^ ',').
// `line_start` is where the line begins: a short last step reads the line's
// last 8 bytes and shifts off those before p, never reading outside it.
std::uint64_t comma_bits(const char* p, std::size_t n, const char* line_start) {
  std::uint64_t word = 0;
  if (n == 8) {
    std::memcpy(&word, p, 8);
  } else if (p + n - line_start >= 8) {
    std::memcpy(&word, p + n - 8, 8);
    word >>= 8 * (8 - n);
  } else {
    for (std::size_t i = 0; i < n; ++i) word |= std::uint64_t{static_cast<unsigned char>(p[i])} << (8 * i);
  }
  constexpr std::uint64_t kLow7 = 0x7F7F7F7F7F7F7F7FULL;
  const std::uint64_t x = word ^ 0x2C2C2C2C2C2C2C2CULL;  // ',' is 0x2C; a byte that was ',' is now 0
  const std::uint64_t found = ~(((x & kLow7) + kLow7) | x | kLow7);
  // Bytes past n were 0, not ','; they came out 0 ^ 0x2C, not found.
  return found;
}

}  // namespace

Status CsvFields::split(std::string_view line) {
  // Most lines have no quoted field: then every field is the trimmed text
  // between commas, found eight bytes at a time (comma_bits) rather than
  // byte by byte. A field that opens with a quote sends the
  // line to the general reading below.
  if (split_unquoted(line)) return Ok{};
  fields_.clear();
  unescaped_.clear();
  // Unescaped text is never longer than the line, so with this capacity the
  // appends below never move the buffer and views into it stay valid.
  unescaped_.reserve(line.size());

  std::size_t pos = 0;
  while (true) {
    std::size_t b = pos;
    while (b < line.size() && is_blank(line[b])) ++b;
    std::size_t after = 0;  // offset just past this field's text
    if (b < line.size() && line[b] == '"') {
      const std::size_t first = b + 1;
      std::size_t i = first;
      bool escapes = false;
      while (true) {
        i = line.find('"', i);
        if (i == std::string_view::npos)
          return Error{"field " + std::to_string(fields_.size() + 1) +
                       " opens a quote that is not closed on its line"};
        if (i + 1 < line.size() && line[i + 1] == '"') {
          escapes = true;
          i += 2;
          continue;
        }
        break;
      }
      std::string_view inner = line.substr(first, i - first);
      if (escapes) {
        const std::size_t start = unescaped_.size();
        for (std::size_t k = 0; k < inner.size(); ++k) {
          unescaped_ += inner[k];
          if (inner[k] == '"') ++k;  // the second quote of a "" pair
        }
        fields_.push_back(std::string_view(unescaped_).substr(start));
      } else {
        fields_.push_back(inner);
      }
      after = i + 1;
      while (after < line.size() && is_blank(line[after])) ++after;
      if (after < line.size() && line[after] != ',')
        return Error{"field " + std::to_string(fields_.size()) + " has text after its closing quote: " +
                     quote_value(line.substr(after))};
    } else {
      after = line.find(',', b);
      if (after == std::string_view::npos) after = line.size();
      fields_.push_back(trim_blanks(line.substr(b, after - b)));
    }
    if (after >= line.size()) break;
    pos = after + 1;  // past the ','
  }
  return Ok{};
}

bool CsvFields::split_unquoted(std::string_view line) {
  fields_.clear();
  const char* const text = line.data();
  // One field, text[from, to) before trimming; false when it opens with a
  // quote. Only a quote at the start of a field quotes it; one further in
  // is a plain character, as in the general reading.
  const auto add = [&](std::size_t from, std::size_t to) {
    // The usual field opens with a byte above '"' and closes with one above
    // ' ' (as unsigned bytes): nothing to trim and no quote, so no loops.
    if (from < to && static_cast<unsigned char>(text[from]) > '"' &&
        static_cast<unsigned char>(text[to - 1]) > ' ') {
      fields_.emplace_back(text + from, to - from);
      return true;
    }
    while (from < to && is_blank(text[from])) ++from;
    if (from < to && text[from] == '"') return false;
    while (to > from && is_blank(text[to - 1])) --to;
    fields_.emplace_back(text + from, to - from);
    return true;
  };
  std::size_t start = 0;
  if constexpr (std::endian::native == std::endian::little) {
    // Eight bytes a step, every comma of the step from one word: whole words
    // first, then the short rest (if any) once.
    const auto fields_up_to_commas = [&](std::uint64_t commas, std::size_t base) {
      while (commas != 0) {
        const std::size_t at = base + static_cast<std::size_t>(std::countr_zero(commas)) / 8;
        commas &= commas - 1;
        if (!add(start, at)) return false;
        start = at + 1;
      }
      return true;
    };
    const std::size_t size = line.size();
    std::size_t base = 0;
    for (; base + 8 <= size; base += 8)
      if (!fields_up_to_commas(comma_bits(text + base, 8, text), base)) return false;
    if (base < size && !fields_up_to_commas(comma_bits(text + base, size - base, text), base)) return false;
  } else {
    for (std::size_t at = 0; at < line.size(); ++at) {
      if (line[at] != ',') continue;
      if (!add(start, at)) return false;
      start = at + 1;
    }
  }
  return add(start, line.size());
}

}  // namespace tallyd
