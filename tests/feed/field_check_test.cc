#include "feed/field_check.h"

#include <catch2/catch.hpp>
#include <fast_float/fast_float.h>

#include <charconv>
#include <cmath>
#include <cstdint>
#include <cstdlib>
#include <cstring>
#include <string>
#include <vector>

namespace tallyd {
namespace {

// "reason: detail" of a fault.
std::string fault_text(const FieldCheck& check) {
  return std::string(reject_label(check->reason)) + ": " + check->detail;
}

std::string count_of(std::string_view text) {
  std::int64_t n = -1;
  FieldCheck c = read_count(text, n);
  return c ? fault_text(c) : "ok " + std::to_string(n);
}

std::string exposure_of(std::string_view text) {
  double e = -1;
  FieldCheck c = read_exposure(text, e);
  return c ? fault_text(c) : "ok " + std::to_string(e);
}

TEST_CASE("quote_value quotes, shortens and escapes", "[feed][field]") {
  CHECK(quote_value("-3") == "'-3'");
  CHECK(quote_value("") == "''");
  CHECK(quote_value(std::string(40, 'a')) == "'" + std::string(40, 'a') + "'");
  CHECK(quote_value(std::string(41, 'a')) == "'" + std::string(40, 'a') + "...'");
  CHECK(quote_value("a\nb\x01") == "'a\\x0Ab\\x01'");
  CHECK(quote_value("x\xFFy") == "'x\\xFFy'");
  CHECK(quote_value("M\xC3\xBChle") == "'M\xC3\xBChle'");  // well-formed UTF-8 stays
  // A multi-byte character is not cut in half at the limit.
  CHECK(quote_value(std::string(39, 'a') + "\xC3\xBC" + "b") == "'" + std::string(39, 'a') + "...'");
}

TEST_CASE("trim_blanks and is_blank_or_comment", "[feed][field]") {
  CHECK(trim_blanks(" \t a b \t") == "a b");
  CHECK(trim_blanks("   ").empty());
  CHECK(is_blank_or_comment(""));
  CHECK(is_blank_or_comment(" \t "));
  CHECK(is_blank_or_comment("# a comment"));
  CHECK(is_blank_or_comment("  #indented"));
  CHECK_FALSE(is_blank_or_comment("a,#b"));
  CHECK_FALSE(is_blank_or_comment("\"#quoted\",1"));
}

TEST_CASE("count must be a whole number >= 0", "[feed][field]") {
  CHECK(count_of("0") == "ok 0");
  CHECK(count_of("17") == "ok 17");
  CHECK(count_of("17.0") == "ok 17");
  CHECK(count_of("1.7e1") == "ok 17");
  CHECK(count_of("-0") == "ok 0");
  CHECK(count_of("9223372036854775807") == "ok 9223372036854775807");
  CHECK(count_of("") == "bad_count: count is empty");
  CHECK(count_of("-3") == "bad_count: count '-3' is negative");
  CHECK(count_of("-3.5") == "bad_count: count '-3.5' is negative");
  CHECK(count_of("3.5") == "bad_count: count '3.5' is not a whole number");
  CHECK(count_of("abc") == "bad_count: count 'abc' is not a number");
  CHECK(count_of("3 traps") == "bad_count: count '3 traps' is not a number");
  CHECK(count_of("nan") == "bad_count: count 'nan' is not a number");
  CHECK(count_of("inf") == "bad_count: count 'inf' is not a number");
  CHECK(count_of("9223372036854775808") == "bad_count: count '9223372036854775808' is too large");
  CHECK(count_of("1e300") == "bad_count: count '1e300' is too large");
  CHECK(count_of("1e999") == "bad_count: count '1e999' is too large");
}

TEST_CASE("exposure must be a finite number > 0, an empty cell is missing effort", "[feed][field]") {
  CHECK(exposure_of("") == "missing_exposure: exposure is empty: the effort behind this count is unknown");
  CHECK(exposure_of("2.5") == "ok 2.500000");
  CHECK(exposure_of("1e-3") == "ok 0.001000");
  CHECK(exposure_of("0") == "zero_exposure: exposure '0' is zero: no effort to judge");
  CHECK(exposure_of("0.0") == "zero_exposure: exposure '0.0' is zero: no effort to judge");
  CHECK(exposure_of("-0") == "zero_exposure: exposure '-0' is zero: no effort to judge");
  CHECK(exposure_of("-1") == "bad_exposure: exposure '-1' is negative");
  CHECK(exposure_of("nan") == "bad_exposure: exposure 'nan' is not finite");
  CHECK(exposure_of("inf") == "bad_exposure: exposure 'inf' is not finite");
  CHECK(exposure_of("1e999") == "bad_exposure: exposure '1e999' is not finite");
  CHECK(exposure_of("two") == "bad_exposure: exposure 'two' is not a number");
  CHECK(exposure_of("1e-400") == "bad_exposure: exposure '1e-400' is too small to represent");
}

TEST_CASE("covariate must be a finite number", "[feed][field]") {
  double v = 0;
  CHECK_FALSE(read_covariate("temp_c", "14.5", v));
  CHECK(v == 14.5);
  CHECK_FALSE(read_covariate("temp_c", "-3", v));
  CHECK(v == -3);
  FieldCheck c = read_covariate("temp_c", "warm", v);
  REQUIRE(c);
  CHECK(c->reason == RejectReason::bad_covariate);
  CHECK(c->detail == "covariate 'temp_c' value 'warm' is not a number");
  c = read_covariate("temp_c", "nan", v);
  REQUIRE(c);
  CHECK(c->detail == "covariate 'temp_c' value 'nan' is not finite");
  CHECK(v == -3);  // untouched on failure
}

TEST_CASE("series id must be non-empty UTF-8 text", "[feed][field]") {
  CHECK_FALSE(check_series("trap-4"));
  CHECK_FALSE(check_series("trap 4, north"));
  CHECK_FALSE(check_series("M\xC3\xBChlbach"));
  FieldCheck c = check_series("");
  REQUIRE(c);
  CHECK(c->reason == RejectReason::bad_series);
  CHECK(c->detail == "series id is empty");
  c = check_series("   ");
  REQUIRE(c);
  CHECK(c->reason == RejectReason::bad_series);
  c = check_series("tr\xFF\xFEp");
  REQUIRE(c);
  CHECK(c->reason == RejectReason::bad_format);
  CHECK(c->detail == "series id 'tr\\xFF\\xFEp' is not valid UTF-8 (byte 3)");
  c = check_series("a\tb");
  REQUIRE(c);
  CHECK(c->reason == RejectReason::bad_format);
  CHECK(c->detail == "series id 'a\\x09b' contains a control character");
}

TEST_CASE("series id: every single byte value at every position, across eight-byte words", "[feed][field]") {
  // check_series tests printable ASCII eight bytes at a time; a single odd
  // byte anywhere in ids of 1 to 19 bytes must be caught as the byte-by-byte
  // definition says: a control character (below 0x20, or 0x7F) or a lone
  // byte >= 0x80 (never valid UTF-8 alone) is refused as bad_format, and
  // every other byte is accepted (a leading blank too, as the id is not all
  // blanks); an id of one blank (space or tab) is empty, bad_series.
  for (std::size_t length = 1; length <= 19; ++length) {
    for (std::size_t at = 0; at < length; ++at) {
      for (int byte = 0; byte < 256; ++byte) {
        std::string id(length, 'k');
        id[at] = static_cast<char>(byte);
        const bool bad = byte < 0x20 || byte >= 0x7F;
        const bool all_blank = length == 1 && (byte == ' ' || byte == '\t');
        const FieldCheck c = check_series(id);
        INFO("length " << length << ", byte " << byte << " at " << at);
        if (all_blank) {
          REQUIRE(c);
          CHECK(c->reason == RejectReason::bad_series);
        } else if (bad) {
          REQUIRE(c);
          CHECK(c->reason == RejectReason::bad_format);
        } else {
          CHECK_FALSE(c);
        }
      }
    }
  }
}

TEST_CASE("time as text and as a number of epoch seconds", "[feed][field]") {
  TimePoint t{};
  CHECK_FALSE(read_time("2000-01-01T00:00:00Z", t));
  CHECK(t.time_since_epoch().count() == 946684800);
  FieldCheck c = read_time("yesterday", t);
  REQUIRE(c);
  CHECK(c->reason == RejectReason::bad_time);
  CHECK(c->detail.find("'yesterday'") != std::string::npos);
  CHECK(t.time_since_epoch().count() == 946684800);  // untouched on failure

  CHECK_FALSE(read_epoch_number("1748757600", t));
  CHECK(t.time_since_epoch().count() == 1748757600);
  CHECK_FALSE(read_epoch_number("1748757600.0", t));
  CHECK(t.time_since_epoch().count() == 1748757600);
  CHECK_FALSE(read_epoch_number("-1", t));
  CHECK(t.time_since_epoch().count() == -1);
  c = read_epoch_number("1748757600.5", t);
  REQUIRE(c);
  CHECK(c->detail == "time '1748757600.5' is not a whole number of epoch seconds");
  c = read_epoch_number("1e30", t);
  REQUIRE(c);
  CHECK(c->detail == "time '1e30' is out of range");
}

// A pseudo-random stream with fixed seed, so that a failure repeats.
struct Lcg {
  std::uint32_t state;
  std::uint32_t next() { return (state = state * 1664525u + 1013904223u) >> 8; }  // Numerical Recipes' constants
};

bool same_bits(double a, double b) {
  std::uint64_t x = 0, y = 0;
  std::memcpy(&x, &a, sizeof a);
  std::memcpy(&y, &b, sizeof b);
  return x == y;
}

TEST_CASE("plain decimals read exactly as fast_float and strtod read them", "[feed][field]") {
  // Reference: fast_float's from_chars (Lemire 2021, "Number parsing at a
  // gigabyte per second"), correctly rounded, and glibc's strtod, correctly
  // rounded to nearest as ISO C and IEEE 754 ask. Inputs: digits with at
  // most one point, 1 to 18 digits (the quick path takes up to 15), leading
  // and trailing zeros, plus forms the quick path leaves to the general one.
  std::vector<std::string> texts = {"0",     "0.0",    "00.5",  "1.0",     "10.0",  "2.5",    "0.1",
                                    "0.3",   "0.7",    "123.456", "999999999999999", "999999999999.999",
                                    "0.000000000000001", "9007199254740993", "1234567890123456.7",
                                    ".5",    "5.",     "1.2.3", "+1",      "-1.5",  "1e5",    "1,5",
                                    " 1",    "1 ",     "",      ".",       "0x10",  "1_000"};
  Lcg rng{7};
  for (int n = 0; n < 20000; ++n) {
    const std::size_t digits = 1 + rng.next() % 18;
    const std::size_t point = rng.next() % (digits + 1);  // == digits: no point
    std::string t;
    for (std::size_t i = 0; i < digits; ++i) {
      if (i == point && i > 0) t += '.';
      const std::uint32_t r = rng.next() % 10;
      t += static_cast<char>('0' + (rng.next() % 4 == 0 ? 0 : r));  // zeros often
    }
    texts.push_back(t);
  }
  for (const std::string& t : texts) {
    INFO("text '" << t << "'");
    double want = 0;
    const char* end = t.data() + t.size();
    const auto [ptr, ec] = fast_float::from_chars(t.data(), end, want);
    const bool want_ok = !t.empty() && ec == std::errc() && ptr == end && std::isfinite(want);
    double got = -7;
    const FieldCheck c = read_covariate("x", t, got);
    REQUIRE(!c == want_ok);
    if (!want_ok) continue;
    CHECK(same_bits(got, want));
    if (t.find_first_not_of("0123456789.") == std::string::npos) CHECK(same_bits(got, std::strtod(t.c_str(), nullptr)));
    double exposure = -7;
    if (!read_exposure(t, exposure)) CHECK(same_bits(exposure, want));
  }
}

TEST_CASE("counts of up to 20 digits read as std::from_chars reads them", "[feed][field]") {
  // Reference: std::from_chars for int64 (C++17 [charconv]); beyond int64 it
  // reports out of range, which is "too large" here.
  Lcg rng{11};
  for (int n = 0; n < 20000; ++n) {
    const std::size_t digits = 1 + rng.next() % 20;
    std::string t;
    for (std::size_t i = 0; i < digits; ++i) t += static_cast<char>('0' + (rng.next() % 3 == 0 ? 9 : rng.next() % 10));
    INFO("text '" << t << "'");
    std::int64_t want = 0;
    const auto [ptr, ec] = std::from_chars(t.data(), t.data() + t.size(), want);
    REQUIRE(ptr == t.data() + t.size());
    std::int64_t got = -1;
    const FieldCheck c = read_count(t, got);
    if (ec == std::errc()) {
      REQUIRE_FALSE(c);
      CHECK(got == want);
    } else {
      REQUIRE(c);
      CHECK(c->detail == "count '" + t + "' is too large");
    }
  }
}

// The series rules of field_check.h, read independently for text whose only
// byte above 0x7F is a lone 0x80 (never well-formed UTF-8, RFC 3629).
std::string series_rule(std::string_view text) {
  std::size_t b = 0, e = text.size();
  while (b < e && (text[b] == ' ' || text[b] == '\t')) ++b;
  while (e > b && (text[e - 1] == ' ' || text[e - 1] == '\t')) --e;
  if (b == e) return "bad_series: series id is empty";
  if (const std::size_t bad = text.find('\x80'); bad != std::string_view::npos)
    return "bad_format: series id " + quote_value(text) + " is not valid UTF-8 (byte " + std::to_string(bad + 1) + ")";
  for (char c : text)
    if (static_cast<unsigned char>(c) < 0x20 || c == 0x7F)
      return "bad_format: series id " + quote_value(text) + " contains a control character";
  return "ok";
}

TEST_CASE("series ids: every short id over blanks, controls and printables gets the rule's verdict",
          "[feed][field]") {
  // All ids of up to 5 bytes from this alphabet (printable ASCII ids take a
  // quick check, the rest the full one): 19,608 ids.
  const std::string alphabet = std::string(" \ta~\x1F\x7F") + '\x80';
  std::size_t checked = 0;
  for (std::size_t length = 0; length <= 5; ++length) {
    std::vector<std::size_t> digit(length, 0);
    while (true) {
      std::string id;
      for (std::size_t d : digit) id += alphabet[d];
      const FieldCheck c = check_series(id);
      INFO("id " << quote_value(id));
      REQUIRE((c ? fault_text(c) : "ok") == series_rule(id));
      ++checked;
      std::size_t k = 0;
      while (k < length && ++digit[k] == alphabet.size()) digit[k++] = 0;
      if (k == length) break;
    }
  }
  CHECK(checked == 19608);
}

}  // namespace
}  // namespace tallyd
