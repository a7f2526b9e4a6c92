#include "feed/utc_stamp.h"

#include <catch2/catch.hpp>

#include <chrono>
#include <cstdint>
#include <cstdio>
#include <string>
#include <vector>

#include "feed/field_check.h"

namespace tallyd {
namespace {

std::string stamp(int y, int mo, int d, int h, int mi, int s) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%04d-%02d-%02dT%02d:%02d:%02dZ", y, mo, d, h, mi, s);
  return buf;
}

// The invariant of the quick reading: it takes a text only when the general
// parser (core/time.h parse_time) takes it too, with the same time; and
// read_time gives what parse_time gives either way.
void check_against_general(const std::string& text) {
  INFO("text '" << text << "'");
  TimePoint quick{Seconds{-123}};
  const bool took = read_utc_stamp(text, quick);
  const Result<TimePoint> general = parse_time(text);
  if (took) {
    REQUIRE(general.ok());
    CHECK(quick == *general);
  } else {
    CHECK(quick == TimePoint{Seconds{-123}});  // untouched
  }
  TimePoint via_field{Seconds{-5}};
  const FieldCheck c = read_time(text, via_field);
  if (general.ok()) {
    CHECK_FALSE(c);
    CHECK(via_field == *general);
  } else {
    REQUIRE(c);
    CHECK(c->reason == RejectReason::bad_time);
    CHECK(c->detail == general.error().message);
  }
}

TEST_CASE("UTC stamps: known instants", "[feed][time]") {
  // POSIX time of these instants (IEEE Std 1003.1, "Seconds Since the
  // Epoch" formula; also GNU date -u -d <stamp> +%s).
  TimePoint t{};
  REQUIRE(read_utc_stamp("1970-01-01T00:00:00Z", t));
  CHECK(t.time_since_epoch().count() == 0);
  REQUIRE(read_utc_stamp("2000-01-01T00:00:00Z", t));
  CHECK(t.time_since_epoch().count() == 946684800);
  REQUIRE(read_utc_stamp("2025-06-01T06:00:00Z", t));
  CHECK(t.time_since_epoch().count() == 1748757600);
  REQUIRE(read_utc_stamp("2000-02-29T23:59:59Z", t));  // 2000 is a leap year (divisible by 400)
  CHECK(t.time_since_epoch().count() == 951868799);
  REQUIRE(read_utc_stamp("1969-12-31T23:59:59Z", t));
  CHECK(t.time_since_epoch().count() == -1);
  REQUIRE(read_utc_stamp("0000-01-01T00:00:00Z", t));
  CHECK(t.time_since_epoch().count() == -62167219200);
  REQUIRE(read_utc_stamp("9999-12-31T23:59:59Z", t));
  CHECK(t.time_since_epoch().count() == 253402300799);
}

TEST_CASE("UTC stamps: every day of 1600-2499 reads as std::chrono's calendar and the general parser read it",
          "[feed][time]") {
  // Reference: std::chrono::sys_days from year_month_day (C++20 [time.cal],
  // proleptic Gregorian), and parse_time. Leap days of 1600, 2000 and 2400
  // exist, those of 1700, 1800, 1900, 2100, 2200, 2300 do not.
  using namespace std::chrono;
  std::uint32_t state = 3339;
  std::size_t days = 0;
  for (int y = 1600; y < 2500; ++y) {
    for (unsigned m = 1; m <= 12; ++m) {
      for (unsigned d = 1; d <= 31; ++d) {
        state = state * 1664525u + 1013904223u;  // Numerical Recipes' LCG constants
        const int h = static_cast<int>((state >> 8) % 24), mi = static_cast<int>((state >> 16) % 60);
        const int s = static_cast<int>((state >> 24) % 60);
        const std::string text = stamp(y, static_cast<int>(m), static_cast<int>(d), h, mi, s);
        const year_month_day ymd{year{y}, month{m}, day{d}};
        TimePoint t{};
        const bool took = read_utc_stamp(text, t);
        if (!ymd.ok()) {
          INFO("text '" << text << "'");
          CHECK_FALSE(took);
          CHECK_FALSE(parse_time(text).ok());
          continue;
        }
        ++days;
        INFO("text '" << text << "'");
        REQUIRE(took);
        CHECK(t == sys_days{ymd} + hours{h} + minutes{mi} + seconds{s});
        CHECK(t == parse_time(text).value());
      }
    }
  }
  CHECK(days == 328719);  // 900 years of 365 days plus 219 leap days (225 multiples of 4, less 6 centuries)
}

TEST_CASE("UTC stamps: out-of-range fields, other RFC 3339 spellings and junk go to the general parser",
          "[feed][time]") {
  std::vector<std::string> texts = {
      "2025-00-10T06:00:00Z", "2025-13-10T06:00:00Z", "2025-06-00T06:00:00Z", "2025-06-31T06:00:00Z",
      "2025-02-29T06:00:00Z", "2024-02-29T06:00:00Z", "1900-02-29T00:00:00Z", "2025-04-31T00:00:00Z",
      "2025-06-01T24:00:00Z", "2025-06-01T23:60:00Z", "2025-06-01T23:59:60Z", "2016-12-31T23:59:60Z",
      "2025-06-01T06:00:00z", "2025-06-01t06:00:00Z", "2025-06-01 06:00:00Z", "2025-06-01T06:00:00.5Z",
      "2025-06-01T06:00:00.000Z", "2025-06-01T06:00:00+00:00", "2025-06-01T08:00:00+02:00",
      "2025-06-01T06:00:00-00:00", "2025-06-01T06:00:00", "2025-06-01T06:00Z", "2025-6-01T06:00:00Z",
      "+2025-06-01T06:00:0Z", "2025-06-01T06:00:00ZZ", "-025-06-01T06:00:00Z", "1748757600", "-1",
      "", "20250601T060000Z", "2025-06-01T06:00:00Z ", " 2025-06-01T06:00:00Z"};
  // Every single-byte change of a good stamp.
  const std::string good = "2024-02-29T23:59:59Z";
  const std::string replacements = std::string("0159-:TtZz .+a/") + '\0' + '\xFF';
  for (std::size_t i = 0; i < good.size(); ++i)
    for (char c : replacements) {
      std::string t = good;
      t[i] = c;
      texts.push_back(t);
    }
  for (const std::string& t : texts) check_against_general(t);
  // Some of these are good RFC 3339 that only the general parser takes.
  TimePoint t{};
  CHECK_FALSE(read_utc_stamp("2016-12-31T23:59:60Z", t));
  CHECK(parse_time("2016-12-31T23:59:60Z").ok());
  CHECK_FALSE(read_utc_stamp("2025-06-01T08:00:00+02:00", t));
  CHECK(parse_time("2025-06-01T08:00:00+02:00").value().time_since_epoch().count() == 1748757600);
}

}  // namespace
}  // namespace tallyd
