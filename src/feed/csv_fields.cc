#include "feed/csv_fields.h"

#include <cstring>

#include "feed/field_check.h"

namespace tallyd {
namespace {

bool is_blank(char c) { return c == ' ' || c == '\t'; }

}  // namespace

Status CsvFields::split(std::string_view line) {
  fields_.clear();
  // Most lines have no quoted field: then every field is the trimmed text
  // between commas, found with memchr (which reads many bytes per step)
  // rather than byte by byte. A field that opens with a quote sends the
  // line to the general reading below.
  if (split_plain(line)) return Ok{};
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

bool CsvFields::split_plain(std::string_view line) {
  const char* p = line.data();
  const char* const end = p + line.size();
  while (true) {
    const char* comma = p == end ? nullptr : static_cast<const char*>(std::memchr(p, ',', end - p));
    const char* b = p;
    const char* e = comma ? comma : end;
    while (b < e && is_blank(*b)) ++b;
    // Only a quote at the start of a field quotes it; one further in is a
    // plain character, as in the general reading.
    if (b < e && *b == '"') return false;
    while (e > b && is_blank(e[-1])) --e;
    fields_.emplace_back(b, static_cast<std::size_t>(e - b));
    if (!comma) return true;
    p = comma + 1;
  }
}

}  // namespace tallyd
