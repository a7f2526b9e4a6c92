#include "feed/jsonl_parser.h"

#include <catch2/catch.hpp>

#include <string>

namespace tallyd {
namespace {

Observation record(JsonlParser& p, std::string_view line) {
  ParseOutcome o = p.parse(line, SourcePos{"s.jsonl", 4});
  INFO(line << " -> " << (o.kind() == LineKind::rejected ? o.rejection().describe() : "not rejected"));
  REQUIRE(o.kind() == LineKind::record);
  return std::move(o.record());
}

std::string refusal(JsonlParser& p, std::string_view line) {
  ParseOutcome o = p.parse(line, SourcePos{"s.jsonl", 4});
  INFO(line);
  REQUIRE(o.kind() == LineKind::rejected);
  return o.rejection().describe();
}

TEST_CASE("JSONL time may be a string or an integer", "[feed][jsonl]") {
  JsonlParser p;
  Observation a = record(p, R"({"time":"2025-06-01T06:00:00Z","series":"trap-4","count":3})");
  Observation b = record(p, R"({"time":1748757600,"series":"trap-4","count":3})");
  Observation c = record(p, R"({"time":"1748757600","series":"trap-4","count":3})");
  Observation d = record(p, R"({"time":1748757600.0,"series":"trap-4","count":3})");
  CHECK(a.time.time_since_epoch().count() == 1748757600);
  CHECK(b.time == a.time);
  CHECK(c.time == a.time);
  CHECK(d.time == a.time);
  CHECK(a.where.source == "s.jsonl");
  CHECK(a.where.line == 4);
  CHECK(refusal(p, R"({"time":1748757600.5,"series":"a","count":3})") ==
        "s.jsonl:4: bad_time: time '1748757600.5' is not a whole number of epoch seconds");
  CHECK(refusal(p, R"({"time":true,"series":"a","count":3})") ==
        "s.jsonl:4: bad_time: time is true/false, not a string or a number");
}

TEST_CASE("JSONL count 3.0 is a whole number, 3.5 is not", "[feed][jsonl]") {
  JsonlParser p;
  CHECK(record(p, R"({"time":0,"series":"a","count":3.0})").count == 3);
  CHECK(record(p, R"({"time":0,"series":"a","count":3})").count == 3);
  CHECK(refusal(p, R"({"time":0,"series":"a","count":3.5})") == "s.jsonl:4: bad_count: count '3.5' is not a whole number");
  CHECK(refusal(p, R"({"time":0,"series":"a","count":-2})") == "s.jsonl:4: bad_count: count '-2' is negative");
  CHECK(refusal(p, R"({"time":0,"series":"a","count":"3"})") ==
        "s.jsonl:4: bad_count: count '3' is a string, not a number");
  CHECK(refusal(p, R"({"time":0,"series":"a","count":null})") == "s.jsonl:4: bad_count: count is null, not a number");
  CHECK(refusal(p, R"({"time":0,"series":"a","count":1e30})") == "s.jsonl:4: bad_count: count '1e30' is too large");
}

TEST_CASE("JSONL numeric extra members are covariates, others are ignored", "[feed][jsonl]") {
  JsonlParser p;
  Observation r = record(
      p, R"({"time":0,"series":"a","count":1,"temp_c":14.5,"note":"wet","who":null,"ok":true,"tags":["x"],"rain":0})");
  REQUIRE(r.covariates.size() == 2);
  CHECK(r.covariates[0].name == "temp_c");
  CHECK(r.covariates[0].value == 14.5);
  CHECK(r.covariates[1].name == "rain");
  CHECK(r.covariates[1].value == 0.0);
  CHECK(refusal(p, R"({"time":0,"series":"a","count":1,"temp_c":1e400})") ==
        "s.jsonl:4: bad_covariate: covariate 'temp_c' value '1e400' is not finite");
}

TEST_CASE("JSONL exposure: absent means 1, null means unknown effort", "[feed][jsonl]") {
  JsonlParser p;
  CHECK(record(p, R"({"time":0,"series":"a","count":1})").exposure == 1.0);
  CHECK(refusal(p, R"({"time":0,"series":"a","count":1,"exposure":null})") ==
        "s.jsonl:4: missing_exposure: exposure is null: the effort behind this count is unknown");
  CHECK(record(p, R"({"time":0,"series":"a","count":1,"exposure":0.5})").exposure == 0.5);
  CHECK(refusal(p, R"({"time":0,"series":"a","count":1,"exposure":0})") ==
        "s.jsonl:4: zero_exposure: exposure '0' is zero: no effort to judge");
  CHECK(refusal(p, R"({"time":0,"series":"a","count":1,"exposure":-2})") ==
        "s.jsonl:4: bad_exposure: exposure '-2' is negative");
  CHECK(refusal(p, R"({"time":0,"series":"a","count":1,"exposure":"2"})") ==
        "s.jsonl:4: bad_exposure: exposure '2' is a string, not a number");
}

TEST_CASE("JSONL series is a string, or an integer taken as its digits", "[feed][jsonl]") {
  JsonlParser p;
  CHECK(record(p, R"({"time":0,"series":"trap 4, north","count":1})").series == "trap 4, north");
  CHECK(record(p, R"({"time":0,"series":17,"count":1})").series == "17");
  CHECK(refusal(p, R"({"time":0,"series":1.5,"count":1})") == "s.jsonl:4: bad_series: series is a number, not a string");
  CHECK(refusal(p, R"({"time":0,"series":"","count":1})") == "s.jsonl:4: bad_series: series id is empty");
  CHECK(refusal(p, R"({"time":0,"series":"a\u0007b","count":1})") ==
        "s.jsonl:4: bad_format: series id 'a\\x07b' contains a control character");
  CHECK(refusal(p, "{\"time\":0,\"series\":\"a\xFF\",\"count\":1}") ==
        "s.jsonl:4: bad_format: broken JSON: a string is not valid UTF-8 at byte 22, near '\\xFF\",\"count\":1}'");
}

TEST_CASE("JSONL missing members are refused in the order time, series, count", "[feed][jsonl]") {
  JsonlParser p;
  CHECK(refusal(p, R"({"series":"a","count":1})") == "s.jsonl:4: bad_time: time is missing");
  CHECK(refusal(p, R"({"time":0,"count":1})") == "s.jsonl:4: bad_series: series is missing");
  CHECK(refusal(p, R"({"time":0,"series":"a"})") == "s.jsonl:4: bad_count: count is missing");
  CHECK(refusal(p, R"({})") == "s.jsonl:4: bad_time: time is missing");
}

TEST_CASE("JSONL broken lines are bad_format whatever their members hold", "[feed][jsonl]") {
  JsonlParser p;
  CHECK(refusal(p, R"({"time":"x","series":"a","count":-1)") ==
        "s.jsonl:4: bad_format: broken JSON: expected ',' or '}' after a member at the end of the line");
  CHECK(refusal(p, R"([1,2,3])") == "s.jsonl:4: bad_format: line is not a JSON object: '[1,2,3]'");
  CHECK(refusal(p, "\x01\x02garbage") == "s.jsonl:4: bad_format: line is not a JSON object: '\\x01\\x02garbage'");
  CHECK(refusal(p, R"({"time":0,"series":"a","count":1} trailing)") ==
        "s.jsonl:4: bad_format: broken JSON: text follows the end of the object at byte 35, near 'trailing'");
  CHECK(refusal(p, R"({"time":0,"series":"a","count":1,"count":2})") ==
        "s.jsonl:4: bad_format: member 'count' appears twice");
  CHECK(refusal(p, R"({"time":0,"series":"a","count":1,"t":1,"t":2})") ==
        "s.jsonl:4: bad_format: member 't' appears twice");
}

TEST_CASE("JSONL blank and comment lines are skipped", "[feed][jsonl]") {
  JsonlParser p;
  CHECK(p.parse("", SourcePos{"s.jsonl", 1}).kind() == LineKind::skip);
  CHECK(p.parse("   ", SourcePos{"s.jsonl", 1}).kind() == LineKind::skip);
  CHECK(p.parse("# exported 2025-06-02", SourcePos{"s.jsonl", 1}).kind() == LineKind::skip);
}

}  // namespace
}  // namespace tallyd
