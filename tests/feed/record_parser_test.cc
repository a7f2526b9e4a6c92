#include "feed/record_parser.h"

#include <catch2/catch.hpp>

namespace tallyd {
namespace {

TEST_CASE("format from a file name", "[feed][format]") {
  CHECK(format_from_path("a/traps.jsonl") == Format::jsonl);
  CHECK(format_from_path("traps.NDJSON") == Format::jsonl);
  CHECK(format_from_path("traps.json") == Format::jsonl);
  CHECK(format_from_path("traps.csv") == Format::csv);
  CHECK(format_from_path("TRAPS.CSV") == Format::csv);
  CHECK(format_from_path("traps.txt") == std::nullopt);
  CHECK(format_from_path("traps") == std::nullopt);
  CHECK(format_from_path("csv") == std::nullopt);
  CHECK(format_name(Format::csv) == "csv");
  CHECK(format_name(Format::jsonl) == "jsonl");
}

TEST_CASE("format from a first line", "[feed][format]") {
  CHECK(format_of_first_line(R"({"time":0})") == Format::jsonl);
  CHECK(format_of_first_line(R"(  {"time":0})") == Format::jsonl);
  CHECK(format_of_first_line("time,series,count") == Format::csv);
}

TEST_CASE("RecordParser parses either format", "[feed][format]") {
  Result<RecordParser> csv = RecordParser::csv("time,series,count", SourcePos{"a.csv", 1});
  REQUIRE(csv.ok());
  CHECK(csv->format() == Format::csv);
  ParseOutcome o = csv->parse("0,x,4", SourcePos{"a.csv", 2});
  REQUIRE(o.kind() == LineKind::record);
  CHECK(o.record().count == 4);

  RecordParser jsonl = RecordParser::jsonl();
  CHECK(jsonl.format() == Format::jsonl);
  o = jsonl.parse(R"({"time":0,"series":"x","count":4})", SourcePos{"a.jsonl", 1});
  REQUIRE(o.kind() == LineKind::record);
  CHECK(o.record().series == "x");

  Result<RecordParser> bad = RecordParser::csv("time,series", SourcePos{"b.csv", 2});
  REQUIRE_FALSE(bad.ok());
  CHECK(bad.error().message.rfind("b.csv:2: CSV header lacks column 'count'", 0) == 0);
}

}  // namespace
}  // namespace tallyd
