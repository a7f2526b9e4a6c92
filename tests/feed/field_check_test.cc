#include "feed/field_check.h"

#include <catch2/catch.hpp>

#include <string>

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

}  // namespace
}  // namespace tallyd
