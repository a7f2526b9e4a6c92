#include "tune/episodes.h"

#include <catch2/catch.hpp>

using namespace tallyd;
using namespace tallyd::tune;

TEST_CASE("episodes: rows, comments and a header-only file", "[tune]") {
  auto e = parse_episodes("series,start,end\n# a comment\n\norchard-s02,2025-06-23T10:05:00Z,2025-07-22T10:32:00Z\r\n",
                          "events.csv");
  REQUIRE(e);
  REQUIRE(e->size() == 1);
  CHECK((*e)[0].series == "orchard-s02");
  CHECK(format_time((*e)[0].start) == "2025-06-23T10:05:00Z");
  CHECK(inside((*e)[0], (*e)[0].end));
  CHECK_FALSE(inside((*e)[0], (*e)[0].end + Seconds{1}));
  auto empty = parse_episodes("series,start,end\n", "events.csv");
  REQUIRE(empty);
  CHECK(empty->empty());
}

TEST_CASE("episodes: bad rows are refused with file and line", "[tune]") {
  auto bad_time = parse_episodes("series,start,end\na,2025-06-01T00:00:00Z,2025-06-02T00:00:00Z\nb,yesterday,2025-06-02T00:00:00Z\n", "ev.csv");
  REQUIRE_FALSE(bad_time);
  CHECK(bad_time.error().message.rfind("ev.csv:3: start:", 0) == 0);
  auto backwards = parse_episodes("series,start,end\na,2025-06-03T00:00:00Z,2025-06-02T00:00:00Z\n", "ev.csv");
  REQUIRE_FALSE(backwards);
  CHECK(backwards.error().message.find("ev.csv:2: end") == 0);
  auto header = parse_episodes("name,from,to\n", "ev.csv");
  REQUIRE_FALSE(header);
  CHECK(header.error().message.find("ev.csv:1:") == 0);
  auto fields = parse_episodes("series,start,end\na,2025-06-01T00:00:00Z\n", "ev.csv");
  REQUIRE_FALSE(fields);
  CHECK(fields.error().message.find("ev.csv:2: expected 3 fields") == 0);
  CHECK_FALSE(parse_episodes("", "ev.csv"));
  auto missing = load_episodes("/nonexistent/events.csv");
  REQUIRE_FALSE(missing);
  CHECK(missing.error().message.find("/nonexistent/events.csv") == 0);
}
