#include "feed/csv_parser.h"

#include <catch2/catch.hpp>

#include <string>

namespace tallyd {
namespace {

CsvParser header(std::string_view line) {
  Result<CsvParser> p = CsvParser::from_header(line, SourcePos{"traps.csv", 1});
  INFO((p ? std::string("ok") : p.error().message));
  REQUIRE(p.ok());
  return std::move(p).value();
}

std::string header_error(std::string_view line) {
  Result<CsvParser> p = CsvParser::from_header(line, SourcePos{"traps.csv", 3});
  REQUIRE_FALSE(p.ok());
  return p.error().message;
}

TEST_CASE("CSV header names the columns in any order", "[feed][csv]") {
  CsvParser p = header("count , series,temp_c,time,\"rain mm\"");
  CHECK(p.column_count() == 5);
  CHECK(p.covariate_names() == std::vector<std::string>{"temp_c", "rain mm"});

  ParseOutcome o = p.parse("7,trap-4,14.5,2025-06-01T06:00:00Z,0.2", SourcePos{"traps.csv", 2});
  REQUIRE(o.kind() == LineKind::record);
  const Observation& r = o.record();
  CHECK(r.time.time_since_epoch().count() == 1748757600);
  CHECK(r.series == "trap-4");
  CHECK(r.count == 7);
  CHECK(r.exposure == 1.0);  // no exposure column
  REQUIRE(r.covariates.size() == 2);
  CHECK(*r.covariate("temp_c") == 14.5);
  CHECK(*r.covariate("rain mm") == 0.2);
  CHECK(r.where.source == "traps.csv");
  CHECK(r.where.line == 2);
}

TEST_CASE("CSV lines sharing a time text each get that time, a bad time after a good one is refused",
          "[feed][csv]") {
  CsvParser p = header("time,series,count");
  // 2025-06-01T06:00:00Z = 1748757600 (as in the test above); +10 min = 1748758200.
  const char* lines[] = {"2025-06-01T06:00:00Z,a,1", "2025-06-01T06:00:00Z,b,2", "2025-06-01T06:10:00Z,a,3",
                         "2025-06-01T06:00:00Z,b,4"};
  const long expected[] = {1748757600, 1748757600, 1748758200, 1748757600};
  for (int i = 0; i < 4; ++i) {
    ParseOutcome o = p.parse(lines[i], SourcePos{"traps.csv", static_cast<std::uint64_t>(i + 2)});
    REQUIRE(o.kind() == LineKind::record);
    CHECK(o.record().time.time_since_epoch().count() == expected[i]);
  }
  ParseOutcome bad = p.parse("2025-06-01T06:00:00,b,5", SourcePos{"traps.csv", 6});
  REQUIRE(bad.kind() == LineKind::rejected);
  CHECK(bad.rejection().reason == RejectReason::bad_time);
  ParseOutcome again = p.parse("2025-06-01T06:00:00Z,b,6", SourcePos{"traps.csv", 7});
  REQUIRE(again.kind() == LineKind::record);
  CHECK(again.record().time.time_since_epoch().count() == 1748757600);
}

TEST_CASE("CSV header errors name the source and what is wrong", "[feed][csv]") {
  CHECK(header_error("time,series,trap_nights") ==
        "traps.csv:3: CSV header lacks column 'count' (it has 'time', 'series', 'trap_nights'); "
        "time, series and count are required");
  CHECK(header_error("Time,Series,Count") ==
        "traps.csv:3: CSV header lacks column 'time', 'series', 'count' (it has 'Time', 'Series', 'Count'); "
        "time, series and count are required");
  CHECK(header_error("time,series,count,count") == "traps.csv:3: CSV header names column 'count' twice");
  CHECK(header_error("time,series,count,\"x") ==
        "traps.csv:3: CSV header is broken: field 4 opens a quote that is not closed on its line");
  CHECK(header_error("time,series,count,t\xFF") ==
        "traps.csv:3: CSV header column 4 name 't\\xFF' is not valid UTF-8");
}

TEST_CASE("CSV exposure column: an empty cell is missing effort, refused", "[feed][csv]") {
  CsvParser p = header("time,series,count,exposure");
  ParseOutcome o = p.parse("1748757600,a,3,", SourcePos{"f.csv", 2});
  REQUIRE(o.kind() == LineKind::rejected);
  CHECK(o.rejection().describe() == "f.csv:2: missing_exposure: exposure is empty: the effort behind this count is unknown");
  o = p.parse("1748757600,a,3,2.5", SourcePos{"f.csv", 3});
  REQUIRE(o.kind() == LineKind::record);
  CHECK(o.record().exposure == 2.5);
  o = p.parse("1748757600,a,3,0", SourcePos{"f.csv", 4});
  REQUIRE(o.kind() == LineKind::rejected);
  CHECK(o.rejection().reason == RejectReason::zero_exposure);
}

TEST_CASE("CSV empty covariate cell leaves the covariate out", "[feed][csv]") {
  CsvParser p = header("time,series,count,temp_c,humidity");
  ParseOutcome o = p.parse("1748757600,a,3,,55", SourcePos{"f.csv", 2});
  REQUIRE(o.kind() == LineKind::record);
  CHECK(o.record().covariate("temp_c") == nullptr);
  REQUIRE(o.record().covariate("humidity") != nullptr);
  CHECK(*o.record().covariate("humidity") == 55.0);
  CHECK(o.record().covariates.size() == 1);
}

TEST_CASE("CSV quoted series may hold commas and quotes", "[feed][csv]") {
  CsvParser p = header("series,time,count");
  ParseOutcome o = p.parse("\"trap 4, \"\"north\"\"\",2025-06-01T06:00:00Z,3", SourcePos{"f.csv", 2});
  REQUIRE(o.kind() == LineKind::record);
  CHECK(o.record().series == "trap 4, \"north\"");
  o = p.parse("\"#7\",2025-06-01T06:00:00Z,3", SourcePos{"f.csv", 3});  // quoted: not a comment
  REQUIRE(o.kind() == LineKind::record);
  CHECK(o.record().series == "#7");
}

TEST_CASE("CSV blank and comment lines are skipped", "[feed][csv]") {
  CsvParser p = header("time,series,count");
  CHECK(p.parse("", SourcePos{"f.csv", 2}).kind() == LineKind::skip);
  CHECK(p.parse("  \t", SourcePos{"f.csv", 3}).kind() == LineKind::skip);
  CHECK(p.parse("# checked by A.", SourcePos{"f.csv", 4}).kind() == LineKind::skip);
}

TEST_CASE("CSV line refusals say what and where", "[feed][csv]") {
  CsvParser p = header("time,series,count,exposure,temp_c");
  auto refusal = [&](std::string_view line) {
    ParseOutcome o = p.parse(line, SourcePos{"f.csv", 9});
    REQUIRE(o.kind() == LineKind::rejected);
    CHECK(o.rejection().where.source == "f.csv");
    CHECK(o.rejection().where.line == 9);
    return o.rejection().describe();
  };
  CHECK(refusal("1748757600,a,3,1") == "f.csv:9: bad_format: line has 4 fields but the header has 5: '1748757600,a,3,1'");
  CHECK(refusal("1748757600,\"a,3,1,2") ==
        "f.csv:9: bad_format: CSV field 2 opens a quote that is not closed on its line");
  CHECK(refusal("June 1,a,3,1,2").rfind("f.csv:9: bad_time: time 'June 1' ", 0) == 0);
  CHECK(refusal("1748757600,,3,1,2") == "f.csv:9: bad_series: series id is empty");
  CHECK(refusal("1748757600,a,-3,1,2") == "f.csv:9: bad_count: count '-3' is negative");
  CHECK(refusal("1748757600,a,,1,2") == "f.csv:9: bad_count: count is empty");
  CHECK(refusal("1748757600,a,3,-1,2") == "f.csv:9: bad_exposure: exposure '-1' is negative");
  CHECK(refusal("1748757600,a,3,1,warm") == "f.csv:9: bad_covariate: covariate 'temp_c' value 'warm' is not a number");
  // The first bad field in the order time, series, count, exposure, covariates wins.
  CHECK(refusal("x,,-3,-1,warm").rfind("f.csv:9: bad_time:", 0) == 0);
  CHECK(refusal("1748757600,,-3,-1,warm") == "f.csv:9: bad_series: series id is empty");
}

// Everything a verdict carries, as text, for comparing two verdicts.
std::string verdict(LineKind kind, const FeedItem& item) {
  if (kind == LineKind::skip) return "skip";
  if (!item.is_record()) return "rejected " + item.rejection().describe();
  const Observation& r = item.record();
  std::string s = "record " + std::to_string(r.time.time_since_epoch().count()) + " <" + r.series + "> " +
                  std::to_string(r.count) + " " + std::to_string(r.exposure) + " @" + r.where.source + ":" +
                  std::to_string(r.where.line);
  for (const Covariate& c : r.covariates) s += " " + c.name + "=" + std::to_string(c.value);
  return s;
}

TEST_CASE("CSV records written over a reused FeedItem equal those of a fresh parse", "[feed][csv]") {
  // parse_into overwrites the record the item already holds (keeping its
  // strings' capacity); nothing of an earlier line may leak into a later
  // one: fewer covariates, shorter ids and names, other sources, refusals
  // and skips in between. Each verdict is compared with parse() by a parser
  // fresh from the header (no state from earlier lines at all).
  const std::string head = "time,series,count,exposure,temp_c,relative_humidity_percent";
  struct Line {
    const char* text;
    const char* source;
  };
  const std::vector<Line> lines = {
      {"2025-06-01T06:00:00Z,a-rather-long-series-identifier,3,2.5,14.5,80", "a/long/path/to/the/traps-north.csv"},
      {"2025-06-01T06:00:00Z,b,4,1.0,,", "n.csv"},                                     // no covariates
      {"2025-06-01T06:00:00Z,b,4,,14.5,80", "a/long/path/to/the/traps-north.csv"},  // refused: no effort
      {"2025-06-01T06:00:00Z,a-rather-long-series-identifier,3,2.5,14.5,80", "a/long/path/to/the/traps-north.csv"},
      {"# a comment", "n.csv"},                                                        // skip: item kept
      {"2025-06-01T06:10:00Z,c,5,2,,33.5", "n.csv"},                                   // only the second
      {"2025-06-01T06:10:00Z,a-rather-long-series-identifier,6,3,-2,", "another/long/source/name.csv"},
      {"2025-06-01T06:10:00Z,\"quoted, id\",7,1,1,2", "n.csv"},
      {"1748758800,d,0,0.5,0,0", "n.csv"},
      {"1748758800,d,1,0.5,,7", "n.csv"},                                              // two, then one
      {"1748758800,d,x,0.5,0,0", "n.csv"},  // refused: count
      {"", "n.csv"},                          // skip
      {"2025-06-01T06:20:00+02:00,e,9,4,,", "n.csv"},
  };
  CsvParser reused = header(head);
  FeedItem item;
  for (std::size_t i = 0; i < lines.size(); ++i) {
    const SourcePos where{lines[i].source, i + 2};
    CsvParser fresh = header(head);
    ParseOutcome want = fresh.parse(lines[i].text, where);
    FeedItem want_item;
    if (want.kind() == LineKind::record) want_item.value = want.record();
    if (want.kind() == LineKind::rejected) want_item.value = want.rejection();

    const std::string before = verdict(LineKind::record, item);  // what the item holds now
    const LineKind kind = reused.parse_into(lines[i].text, where, item);
    INFO("line " << lines[i].text);
    REQUIRE(kind == want.kind());
    CHECK(verdict(kind, item) == verdict(want.kind(), want_item));
    if (kind == LineKind::skip) CHECK(verdict(LineKind::record, item) == before);  // left alone
  }
  // The last record, as an independent check of the values themselves:
  // 06:20 at +02:00 is 04:20 UTC, 1748751600 (2025-06-01T04:20:00Z).
  REQUIRE(item.is_record());
  CHECK(item.record().time.time_since_epoch().count() == 1748751600);
  CHECK(item.record().series == "e");
  CHECK(item.record().covariates.empty());
  CHECK(item.record().where.source == "n.csv");
}

}  // namespace
}  // namespace tallyd
