#include "core/time.h"

#include <catch2/catch.hpp>

#include <string>

namespace tallyd {
namespace {

// Epoch seconds of a time stamp; fails the test if it does not parse.
long long epoch(std::string_view text) {
  Result<TimePoint> t = parse_time(text);
  INFO(text << ": " << (t ? std::string("ok") : t.error().message));
  REQUIRE(t.ok());
  return t->time_since_epoch().count();
}

std::string error_of(std::string_view text) {
  Result<TimePoint> t = parse_time(text);
  INFO(text);
  REQUIRE_FALSE(t.ok());
  return t.error().message;
}

// Expected values below are independent of this code: each is what
// `date -u -d <time stamp> +%s` (GNU coreutils) prints.
TEST_CASE("parse_time reads RFC 3339 in UTC", "[core][time]") {
  CHECK(epoch("1970-01-01T00:00:00Z") == 0);
  CHECK(epoch("1969-12-31T23:59:59Z") == -1);
  CHECK(epoch("2000-01-01T00:00:00Z") == 946684800);
  CHECK(epoch("2025-06-01T06:00:00Z") == 1748757600);
  CHECK(epoch("2038-01-19T03:14:08Z") == 2147483648LL);
  CHECK(epoch("1900-03-01T00:00:00Z") == -2203891200LL);
  CHECK(epoch("2100-02-28T23:59:59Z") == 4107542399LL);
  CHECK(epoch("0001-01-01T00:00:00Z") == -62135596800LL);
  CHECK(epoch("9999-12-31T23:59:59Z") == 253402300799LL);
}

TEST_CASE("parse_time applies UTC offsets", "[core][time]") {
  CHECK(epoch("2025-06-01T08:00:00+02:00") == 1748757600);
  CHECK(epoch("2025-06-01T01:30:00-04:30") == 1748757600);
  CHECK(epoch("2025-06-01T06:00:00+00:00") == 1748757600);
  CHECK(epoch("2025-06-01T06:00:00-00:00") == 1748757600);
  CHECK(epoch("2025-06-02T05:59:00+23:59") == 1748757600);
}

TEST_CASE("parse_time accepts the RFC 3339 variants", "[core][time]") {
  CHECK(epoch("2025-06-01t06:00:00z") == 1748757600);
  CHECK(epoch("2025-06-01 06:00:00Z") == 1748757600);
  CHECK(epoch("2025-06-01T06:00:00.999Z") == 1748757600);  // fractions are cut, not rounded
  CHECK(epoch("2025-06-01T06:00:00.5+02:00") == 1748757600 - 7200);
  CHECK(epoch("2016-12-31T23:59:60Z") == 1483228799);  // the leap second folds into :59
  CHECK(epoch("2017-01-01T00:59:60+01:00") == 1483228799);
}

TEST_CASE("parse_time knows leap days", "[core][time]") {
  CHECK(epoch("2024-02-29T12:00:00Z") == 1709208000);
  CHECK(epoch("2024-03-01T00:00:00Z") == 1709251200);
  CHECK(epoch("2000-02-29T00:00:00Z") == 951782400);
  CHECK(error_of("2023-02-29T12:00:00Z").find("is not a calendar date") != std::string::npos);
  CHECK(error_of("1900-02-29T00:00:00Z").find("is not a calendar date") != std::string::npos);
  CHECK(error_of("2025-04-31T00:00:00Z").find("is not a calendar date") != std::string::npos);
}

TEST_CASE("parse_time reads integer epoch seconds", "[core][time]") {
  CHECK(epoch("0") == 0);
  CHECK(epoch("1748757600") == 1748757600);
  CHECK(epoch("-86400") == -86400);
  CHECK(error_of("99999999999999999999").find("is not a valid epoch second count") != std::string::npos);
  CHECK(error_of("-").find("is not a valid epoch second count") != std::string::npos);
}

TEST_CASE("parse_time refuses garbage with a message quoting it", "[core][time]") {
  CHECK(error_of("") == "time '' is empty (want RFC 3339 like 2025-06-01T06:00:00Z, or epoch seconds)");
  CHECK(error_of("yesterday") ==
        "time 'yesterday' has no valid year (want RFC 3339 like 2025-06-01T06:00:00Z, or epoch seconds)");
  CHECK(error_of("2025-06-01").find("has no time of day") != std::string::npos);
  CHECK(error_of("2025-06-01T06:00:00").find("has no UTC offset") != std::string::npos);
  CHECK(error_of("2025-13-01T06:00:00Z").find("has no valid month") != std::string::npos);
  CHECK(error_of("2025-06-01T24:00:00Z").find("has no valid hour") != std::string::npos);
  CHECK(error_of("2025-06-01T06:60:00Z").find("has no valid minute") != std::string::npos);
  CHECK(error_of("2025-06-01T06:00:61Z").find("has no valid second") != std::string::npos);
  CHECK(error_of("2025-06-01T06:00:60Z").find("has second 60 outside a leap second") != std::string::npos);
  CHECK(error_of("2025-06-01T06:00:00.Z").find("has an empty fraction") != std::string::npos);
  CHECK(error_of("2025-06-01T06:00:00+2:00").find("has a bad UTC offset") != std::string::npos);
  CHECK(error_of("2025-06-01T06:00:00+24:00").find("has a bad UTC offset") != std::string::npos);
  CHECK(error_of("2025-06-01T06:00:00Zjunk").find("has trailing characters") != std::string::npos);
  CHECK(error_of("1748757600.5").find("has no valid year") != std::string::npos);
  CHECK(error_of(" 1748757600").find("has no valid year") != std::string::npos);
}

TEST_CASE("parse_time messages stay short and printable", "[core][time]") {
  CHECK(error_of("\x01\xFF" "abc") ==
        "time '\\x01\\xFFabc' has no valid year (want RFC 3339 like 2025-06-01T06:00:00Z, or epoch seconds)");
  const std::string long_text(100, 'q');
  CHECK(error_of(long_text).rfind("time '" + std::string(40, 'q') + "...' has no valid year", 0) == 0);
}

TEST_CASE("format_time writes UTC RFC 3339 and round-trips", "[core][time]") {
  CHECK(format_time(TimePoint{Seconds{1748757600}}) == "2025-06-01T06:00:00Z");
  CHECK(format_time(TimePoint{Seconds{-1}}) == "1969-12-31T23:59:59Z");
  CHECK(format_time(TimePoint{Seconds{1709208000}}) == "2024-02-29T12:00:00Z");
  for (long long s : {0LL, 946684800LL, 1483228799LL, 4107542399LL, -2203891200LL})
    CHECK(epoch(format_time(TimePoint{Seconds{s}})) == s);
}

TEST_CASE("parse_duration reads units and sums of them", "[core][time]") {
  auto seconds = [](std::string_view text) {
    Result<Seconds> d = parse_duration(text);
    INFO(text << ": " << (d ? std::string("ok") : d.error().message));
    REQUIRE(d.ok());
    return d->count();
  };
  CHECK(seconds("45s") == 45);
  CHECK(seconds("90m") == 5400);
  CHECK(seconds("12h") == 43200);
  CHECK(seconds("7d") == 604800);
  CHECK(seconds("2w") == 1209600);
  CHECK(seconds("1y") == 31557600);  // 365.25 days
  CHECK(seconds("1d12h") == 129600);
  CHECK(seconds("1.5h") == 5400);
  CHECK(seconds("0.5s") == 1);  // rounded to whole seconds
}

TEST_CASE("parse_duration refuses what is not a duration", "[core][time]") {
  auto error = [](std::string_view text) {
    Result<Seconds> d = parse_duration(text);
    INFO(text);
    REQUIRE_FALSE(d.ok());
    return d.error().message;
  };
  CHECK(error("") == "duration '' is empty (want e.g. 90m, 12h, 7d, 2w, 1y, 1d12h)");
  CHECK(error("7").find("needs a unit") != std::string::npos);
  CHECK(error("d").find("needs a number") != std::string::npos);
  CHECK(error("7x").find("has an unknown unit") != std::string::npos);
  CHECK(error("-7d").find("needs a number") != std::string::npos);
  CHECK(error("0s").find("must be positive") != std::string::npos);
  CHECK(error("1.2.3h").find("has a bad number") != std::string::npos);
  CHECK(error("99999999999999999999y").find("is too long") != std::string::npos);
  CHECK(error("20000000y20000000y").find("is too long") != std::string::npos);
}

TEST_CASE("format_duration picks the largest exact unit", "[core][time]") {
  CHECK(format_duration(Seconds{604800}) == "1w");
  CHECK(format_duration(Seconds{86400 * 3}) == "3d");
  CHECK(format_duration(Seconds{5400}) == "90m");
  CHECK(format_duration(Seconds{31557600}) == "1y");
  CHECK(format_duration(Seconds{61}) == "61s");
  for (const char* text : {"1w", "90m", "1y", "2w", "45s", "36h", "3d"})
    CHECK(format_duration(*parse_duration(text)) == text);
  for (long long s : {1LL, 59LL, 3600LL, 86400LL * 10, 31557600LL * 2, 31557601LL})
    CHECK(parse_duration(format_duration(Seconds{s}))->count() == s);
}

TEST_CASE("years_between uses a 365.25-day year", "[core][time]") {
  const TimePoint origin{Seconds{946684800}};
  CHECK(years_between(origin, origin + Seconds{31557600}) == 1.0);
  CHECK(years_between(origin, origin - Seconds{31557600 / 2}) == -0.5);
}

}  // namespace
}  // namespace tallyd
