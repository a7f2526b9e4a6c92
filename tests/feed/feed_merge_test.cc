#include "feed/feed_merge.h"

#include <catch2/catch.hpp>

#include <filesystem>
#include <fstream>
#include <random>
#include <string>
#include <vector>

#include "support/temp_dir.h"

namespace tallyd {
namespace {

using testing::TempDir;

// "<series><count>" for a record (each test record has a unique pair),
// "reject <file name>:<line>" for a refusal.
std::string label(const FeedItem& item) {
  if (item.is_record()) return item.record().series + std::to_string(item.record().count);
  const SourcePos& w = item.rejection().where;
  return "reject " + std::filesystem::path(w.source).filename().string() + ":" + std::to_string(w.line);
}

std::vector<std::string> labels(FeedSet& set) {
  std::vector<std::string> out;
  FeedItem item;
  while (set.next(item)) out.push_back(label(item));
  CHECK_FALSE(set.next(item));
  return out;
}

TEST_CASE("merge: three feeds come out by time, ties in the order the feeds were given", "[feed][merge]") {
  TempDir dir;
  const std::string a = dir.write("a.csv",
                                  "time,series,count\n"
                                  "2025-06-01T06:00:00Z,a,1\n"
                                  "2025-06-01T08:00:00Z,a,2\n"
                                  "2025-06-01T08:00:00Z,a,3\n"
                                  "2025-06-01T10:00:00Z,a,4\n");
  const std::string b = dir.write("b.jsonl",
                                  R"({"time":"2025-06-01T07:00:00Z","series":"b","count":1})" "\n"
                                  R"({"time":"2025-06-01T08:00:00Z","series":"b","count":2})" "\n"
                                  R"({"time":"2025-06-01T08:30:00Z","series":"b",)" "\n"
                                  R"({"time":1748768400,"series":"b","count":3})" "\n");
  const std::string c = dir.write("c.csv",
                                  "time,series,count\n"
                                  "2025-06-01T05:00:00Z,c,1\n"
                                  "2025-06-01T08:00:00Z,c,2\n"
                                  "2025-06-01T07:30:00Z,c,3\n"  // out of order: comes out on c's turn
                                  "2025-06-01T11:00:00Z,c,4\n");
  Result<FeedSet> set = FeedSet::open({a, b, c}, ReadOptions{});
  REQUIRE(set.ok());
  CHECK(set->feed_count() == 3);
  CHECK(labels(*set) == std::vector<std::string>{"c1", "a1", "b1", "a2", "a3", "b2", "reject b.jsonl:3", "c2", "c3",
                                                 "b3", "a4", "c4"});

  // Another order of the same feeds changes only how ties go.
  Result<FeedSet> reversed = FeedSet::open({c, b, a}, ReadOptions{});
  REQUIRE(reversed.ok());
  CHECK(labels(*reversed) == std::vector<std::string>{"c1", "a1", "b1", "c2", "c3", "b2", "reject b.jsonl:3", "a2",
                                                      "a3", "b3", "a4", "c4"});
}

TEST_CASE("merge: one feed comes out exactly as it is read", "[feed][merge]") {
  TempDir dir;
  const std::string path = dir.write("one.csv",
                                     "time,series,count\n"
                                     "2025-06-01T09:00:00Z,x,1\n"
                                     "2025-06-01T08:00:00Z,x,2\n"
                                     "bad line\n"
                                     "2025-06-01T08:00:00Z,y,3\n"
                                     "2025-06-01T07:00:00Z,x,4\n");
  Result<FeedFile> file = FeedFile::open(path, ReadOptions{});
  REQUIRE(file.ok());
  std::vector<std::string> direct;
  FeedItem item;
  while (file->next(item)) direct.push_back(label(item));

  Result<FeedSet> set = FeedSet::open({path}, ReadOptions{});
  REQUIRE(set.ok());
  CHECK(labels(*set) == direct);
  CHECK(direct == std::vector<std::string>{"x1", "x2", "reject one.csv:4", "y3", "x4"});
}

TEST_CASE("merge: a feed that cannot be opened fails the set, naming every culprit", "[feed][merge]") {
  TempDir dir;
  const std::string good = dir.write("good.csv", "time,series,count\n0,a,1\n");
  const std::string headless = dir.write("headless.csv", "time,series\n0,a\n");
  const std::string missing = dir.path("missing.jsonl");
  Result<FeedSet> set = FeedSet::open({good, missing, headless}, ReadOptions{});
  REQUIRE_FALSE(set.ok());
  CHECK(set.error().message == "cannot open '" + missing + "': No such file or directory\n" + headless +
                                   ":1: CSV header lacks column 'count' (it has 'time', 'series'); "
                                   "time, series and count are required");
}

TEST_CASE("merge: no feeds, or only empty ones, give nothing", "[feed][merge]") {
  FeedSet none{std::vector<FeedFile>{}};
  FeedItem item;
  CHECK_FALSE(none.next(item));
  TempDir dir;
  Result<FeedSet> empty = FeedSet::open({dir.write("e.csv", ""), dir.write("e.jsonl", "\n")}, ReadOptions{});
  REQUIRE(empty.ok());
  CHECK(labels(*empty).empty());
}

}  // namespace
}  // namespace tallyd
