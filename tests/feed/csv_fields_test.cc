#include "feed/csv_fields.h"

#include <catch2/catch.hpp>

#include <cstdint>
#include <string>
#include <vector>

#include "feed/field_check.h"

namespace tallyd {
namespace {

std::vector<std::string> fields_of(CsvFields& f, std::string_view line) {
  Status s = f.split(line);
  REQUIRE(s.ok());
  std::vector<std::string> out;
  for (std::size_t i = 0; i < f.size(); ++i) out.emplace_back(f[i]);
  return out;
}

using V = std::vector<std::string>;

TEST_CASE("CSV fields are split at commas and trimmed", "[feed][csv]") {
  CsvFields f;
  CHECK(fields_of(f, "a,b,c") == V{"a", "b", "c"});
  CHECK(fields_of(f, " a , b\t,c ") == V{"a", "b", "c"});
  CHECK(fields_of(f, "a,,c") == V{"a", "", "c"});
  CHECK(fields_of(f, "a,") == V{"a", ""});
  CHECK(fields_of(f, "") == V{""});
  CHECK(fields_of(f, "a\"b,c") == V{"a\"b", "c"});  // a quote inside a bare field is kept
}

TEST_CASE("quoted CSV fields follow RFC 4180 on one line", "[feed][csv]") {
  CsvFields f;
  CHECK(fields_of(f, "\"trap 4, north\",3") == V{"trap 4, north", "3"});
  CHECK(fields_of(f, "\"he said \"\"hi\"\"\",2") == V{"he said \"hi\"", "2"});
  CHECK(fields_of(f, "\"\"\"\",\"\"") == V{"\"", ""});
  CHECK(fields_of(f, "  \" keep spaces \"  ,x") == V{" keep spaces ", "x"});
  CHECK(fields_of(f, "\"a\"\"b\",\"c\"\"d\",e") == V{"a\"b", "c\"d", "e"});
}

TEST_CASE("broken CSV quoting is an error naming the field", "[feed][csv]") {
  CsvFields f;
  Status s = f.split("x,\"open,3");
  REQUIRE_FALSE(s.ok());
  CHECK(s.error().message == "field 2 opens a quote that is not closed on its line");
  s = f.split("\"a\"b,c");
  REQUIRE_FALSE(s.ok());
  CHECK(s.error().message == "field 1 has text after its closing quote: 'b,c'");
}

TEST_CASE("CSV fields from an earlier line do not leak into the next", "[feed][csv]") {
  CsvFields f;
  CHECK(fields_of(f, "\"a\"\"1\",\"b\"\"2\",c,d") == V{"a\"1", "b\"2", "c", "d"});
  CHECK(fields_of(f, "\"x\"\"\",y") == V{"x\"", "y"});
}

// An independent reading of the header's rules (RFC 4180 section 2, on one
// line: fields split at ',', a field that opens with '"' after blanks is
// quoted and "" inside it is one '"'; plus the header's own additions:
// unquoted fields lose blanks at either end, blanks may surround quotes).
struct Reading {
  std::string error;  // empty when the line splits
  std::vector<std::string> fields;
  bool operator==(const Reading&) const = default;
};

std::ostream& operator<<(std::ostream& os, const Reading& r) {
  os << (r.error.empty() ? "ok" : r.error) << " [";
  for (const std::string& f : r.fields) os << "<" << f << ">";
  return os << "]";
}

Reading reference_reading(std::string_view line) {
  Reading r;
  std::size_t i = 0;
  auto blank = [&](std::size_t k) { return k < line.size() && (line[k] == ' ' || line[k] == '\t'); };
  while (true) {
    const std::size_t number = r.fields.size() + 1;
    std::size_t b = i;
    while (blank(b)) ++b;
    if (b < line.size() && line[b] == '"') {
      std::string text;
      std::size_t k = b + 1;
      while (true) {
        if (k >= line.size())
          return Reading{"field " + std::to_string(number) + " opens a quote that is not closed on its line", {}};
        if (line[k] == '"') {
          if (k + 1 < line.size() && line[k + 1] == '"') {
            text += '"';
            k += 2;
            continue;
          }
          break;
        }
        text += line[k++];
      }
      r.fields.push_back(text);
      ++k;  // past the closing quote
      while (blank(k)) ++k;
      if (k < line.size() && line[k] != ',')
        return Reading{"field " + std::to_string(number) + " has text after its closing quote: " +
                           quote_value(line.substr(k)),
                       {}};
      if (k >= line.size()) return r;
      i = k + 1;
    } else {
      std::size_t e = b;
      while (e < line.size() && line[e] != ',') ++e;
      std::size_t t = e;
      while (t > b && (line[t - 1] == ' ' || line[t - 1] == '\t')) --t;
      r.fields.emplace_back(line.substr(b, t - b));
      if (e >= line.size()) return r;
      i = e + 1;
    }
  }
}

Reading split_reading(CsvFields& f, std::string_view line) {
  Status s = f.split(line);
  if (!s) return Reading{s.error().message, {}};
  Reading r;
  for (std::size_t i = 0; i < f.size(); ++i) r.fields.emplace_back(f[i]);
  return r;
}

TEST_CASE("CSV fields: every short line over a, comma, blanks and quotes splits as RFC 4180 on one line",
          "[feed][csv]") {
  // All 19,531 lines of up to 6 characters from this alphabet: lines without
  // a quoted field take the memchr reading, the rest the general one, and
  // both must agree with the reference (which knows no such split).
  const std::string alphabet = "a, \t\"";
  CsvFields f;
  std::string line;
  std::size_t checked = 0;
  for (std::size_t length = 0; length <= 6; ++length) {
    std::vector<std::size_t> digit(length, 0);
    while (true) {
      line.clear();
      for (std::size_t d : digit) line += alphabet[d];
      INFO("line <" << line << ">");
      REQUIRE(split_reading(f, line) == reference_reading(line));
      ++checked;
      std::size_t k = 0;
      while (k < length && ++digit[k] == alphabet.size()) digit[k++] = 0;
      if (k == length) break;
    }
  }
  CHECK(checked == 19531);
}

TEST_CASE("CSV fields: long pseudo-random lines split as the reference reads them", "[feed][csv]") {
  // Fields longer than the 32 bytes memchr reads per step, and quotes now
  // and then; fixed seed so that a failure repeats.
  const std::string letters = "abcdefghxyz0123456789";
  const std::string specials = ",, \t\"";
  std::uint32_t state = 20261202;
  CsvFields f;
  for (int n = 0; n < 3000; ++n) {
    state = state * 1664525u + 1013904223u;  // Numerical Recipes' LCG constants
    const std::size_t length = (state >> 8) % 160;
    std::string line;
    for (std::size_t i = 0; i < length; ++i) {
      state = state * 1664525u + 1013904223u;
      // Mostly letters and digits, so that many fields are long.
      const std::string& from = (state >> 12) % 100 < 85 ? letters : specials;
      line += from[(state >> 20) % from.size()];
    }
    INFO("line <" << line << ">");
    REQUIRE(split_reading(f, line) == reference_reading(line));
  }
}

}  // namespace
}  // namespace tallyd
