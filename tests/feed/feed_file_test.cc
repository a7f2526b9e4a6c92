#include "feed/feed_file.h"

#include <catch2/catch.hpp>

#include <filesystem>
#include <fstream>
#include <random>
#include <string>
#include <vector>

#include "core/time.h"
#include "support/temp_dir.h"

namespace tallyd {
namespace {

using testing::TempDir;

// One line per item: a record's fields, or a refusal as describe() gives it.
std::string summary(const FeedItem& item) {
  if (!item.is_record()) return item.rejection().describe();
  const Observation& r = item.record();
  std::string s = "record " + std::to_string(r.where.line) + " " + format_time(r.time) + " [" + r.series +
                  "] " + std::to_string(r.count) + " x" + std::to_string(r.exposure);
  for (const Covariate& c : r.covariates) s += " " + c.name + "=" + std::to_string(c.value);
  return s;
}

std::vector<std::string> read_all(FeedFile& feed) {
  std::vector<std::string> out;
  FeedItem item;
  while (feed.next(item)) out.push_back(summary(item));
  CHECK_FALSE(feed.next(item));  // the end stays the end
  return out;
}

std::vector<std::string> read_path(const std::string& path, ReadOptions options = {}) {
  Result<FeedFile> feed = FeedFile::open(path, options);
  INFO((feed ? std::string() : feed.error().message));
  REQUIRE(feed.ok());
  return read_all(*feed);
}

const std::string kLong(200, 'z');

// One line for every refusal the parsers give, between good lines.
const std::string kCsv =
    "# trap counts, north field\n"
    "time,series,count,exposure,temp_c\n"
    "2025-06-01T06:00:00Z,trap-1,3,1,14.5\n"
    "2025-06-01T25:00:00Z,trap-1,3,1,14.5\n"
    "2025-06-01T07:00:00Z,,3,1,14.5\n"
    "2025-06-01T08:00:00Z,trap-1,-3,1,14.5\n"
    "2025-06-01T09:00:00Z,trap-1,3,-2,14.5\n"
    "2025-06-01T10:00:00Z,trap-1,3,0,14.5\n"
    "2025-06-01T11:00:00Z,trap-1,3,1,warm\n" +
    kLong + "\n" +
    "2025-06-01T12:00:00Z,trap-1,3,1\n"
    "2025-06-01T13:00:00Z,tr\xFF\x61p,3,1,2\n"
    "\n"
    "2025-06-01T14:00:00Z,\"trap 2, south\",4,1,\n";

std::vector<std::string> csv_expected(const std::string& p) {
  return {
      "record 3 2025-06-01T06:00:00Z [trap-1] 3 x1.000000 temp_c=14.500000",
      p + ":4: bad_time: time '2025-06-01T25:00:00Z' has no valid hour (want RFC 3339 like 2025-06-01T06:00:00Z, "
          "or epoch seconds)",
      p + ":5: bad_series: series id is empty",
      p + ":6: bad_count: count '-3' is negative",
      p + ":7: bad_exposure: exposure '-2' is negative",
      p + ":8: zero_exposure: exposure '0' is zero: no effort to judge",
      p + ":9: bad_covariate: covariate 'temp_c' value 'warm' is not a number",
      p + ":10: line_too_long: line is longer than 100 bytes and was skipped; it starts '" + std::string(40, 'z') +
          "...'",
      p + ":11: bad_format: line has 4 fields but the header has 5: '2025-06-01T12:00:00Z,trap-1,3,1'",
      p + ":12: bad_format: series id 'tr\\xFFap' is not valid UTF-8 (byte 3)",
      "record 14 2025-06-01T14:00:00Z [trap 2, south] 4 x1.000000",
  };
}

const std::string kJsonl =
    "# trap counts, south field\n"
    R"({"time":"2025-06-01T06:00:00Z","series":"trap-1","count":3,"temp_c":14.5,"note":"dry"})" "\n"
    R"({"time":"June","series":"trap-1","count":3})" "\n"
    R"({"time":1748761200,"series":"","count":3})" "\n"
    R"({"time":1748764800,"series":"trap-1","count":3.5})" "\n"
    R"({"time":1748768400,"series":"trap-1","count":3,"exposure":-2})" "\n"
    R"({"time":1748772000,"series":"trap-1","count":3,"exposure":0})" "\n"
    R"({"time":1748775600,"series":"trap-1","count":3,"temp_c":1e999})" "\n" +
    kLong + "\n" +
    R"({"time":1748779200,"series":"trap-1","count":3)" "\n"
    "\x7F\x45LF\x02\x01\n"
    R"({"time":1748786400,"series":"trap 2, south","count":4.0})" "\n";

std::vector<std::string> jsonl_expected(const std::string& p) {
  return {
      "record 2 2025-06-01T06:00:00Z [trap-1] 3 x1.000000 temp_c=14.500000",
      p + ":3: bad_time: time 'June' has no valid year (want RFC 3339 like 2025-06-01T06:00:00Z, or epoch seconds)",
      p + ":4: bad_series: series id is empty",
      p + ":5: bad_count: count '3.5' is not a whole number",
      p + ":6: bad_exposure: exposure '-2' is negative",
      p + ":7: zero_exposure: exposure '0' is zero: no effort to judge",
      p + ":8: bad_covariate: covariate 'temp_c' value '1e999' is not finite",
      p + ":9: line_too_long: line is longer than 100 bytes and was skipped; it starts '" + std::string(40, 'z') +
          "...'",
      p + ":10: bad_format: broken JSON: expected ',' or '}' after a member at the end of the line",
      p + ":11: bad_format: line is not a JSON object: '\\x7FELF\\x02\\x01'",
      "record 12 2025-06-01T14:00:00Z [trap 2, south] 4 x1.000000",
  };
}

TEST_CASE("feed file: every CSV refusal names file, line and value, good lines around it survive",
          "[feed][file]") {
  TempDir dir;
  const std::string path = dir.write("north.csv", kCsv);
  ReadOptions options;
  options.max_line_bytes = 100;
  CHECK(read_path(path, options) == csv_expected(path));
}

TEST_CASE("feed file: every JSON Lines refusal names file, line and value, good lines around it survive",
          "[feed][file]") {
  TempDir dir;
  const std::string path = dir.write("south.jsonl", kJsonl);
  ReadOptions options;
  options.max_line_bytes = 100;
  CHECK(read_path(path, options) == jsonl_expected(path));
}

TEST_CASE("feed file: reading one byte at a time gives the same items", "[feed][file]") {
  TempDir dir;
  for (const auto& [name, content] : {std::pair{"a.csv", kCsv}, std::pair{"a.jsonl", kJsonl}}) {
    const std::string path = dir.write(name, content);
    ReadOptions options;
    options.max_line_bytes = 100;
    const std::vector<std::string> whole = read_path(path, options);
    for (std::size_t chunk : {1, 2, 3, 101, 4096}) {
      INFO(name << " chunk " << chunk);
      options.chunk_bytes = chunk;
      CHECK(read_path(path, options) == whole);
    }
  }
}

TEST_CASE("feed file: CRLF line ends read like LF", "[feed][file]") {
  TempDir dir;
  for (const auto& [name, content] : {std::pair{"b.csv", kCsv}, std::pair{"b.jsonl", kJsonl}}) {
    std::string crlf;
    for (char c : content) crlf += c == '\n' ? std::string("\r\n") : std::string(1, c);
    const std::string lf_path = dir.write(name, content);
    const std::string crlf_path = dir.write(std::string("crlf-") + name, crlf);
    ReadOptions options;
    options.max_line_bytes = 100;
    std::vector<std::string> lf_items = read_path(lf_path, options);
    std::vector<std::string> crlf_items = read_path(crlf_path, options);
    REQUIRE(lf_items.size() == crlf_items.size());
    for (std::size_t i = 0; i < lf_items.size(); ++i) {
      // The same items; refusals name their own file.
      const std::size_t at = lf_items[i].find(lf_path);
      if (at != std::string::npos) lf_items[i].replace(at, lf_path.size(), crlf_path);
      CHECK(crlf_items[i] == lf_items[i]);
    }
  }
}

TEST_CASE("feed file: a file that does not exist is an error naming it", "[feed][file]") {
  TempDir dir;
  const std::string path = dir.path("missing.csv");
  Result<FeedFile> feed = FeedFile::open(path, ReadOptions{});
  REQUIRE_FALSE(feed.ok());
  CHECK(feed.error().message == "cannot open '" + path + "': No such file or directory");

  Result<FeedFile> directory = FeedFile::open(dir.path(""), ReadOptions{});
  REQUIRE_FALSE(directory.ok());
  CHECK(directory.error().message.find("it is a directory") != std::string::npos);
}

TEST_CASE("feed file: a CSV header without count is an error for the whole file", "[feed][file]") {
  TempDir dir;
  const std::string path = dir.write("nocount.csv", "# comment\n\ntime,series,traps\n0,a,1\n");
  Result<FeedFile> feed = FeedFile::open(path, ReadOptions{});
  REQUIRE_FALSE(feed.ok());
  CHECK(feed.error().message == path +
                                    ":3: CSV header lacks column 'count' (it has 'time', 'series', 'traps'); "
                                    "time, series and count are required");
}

TEST_CASE("feed file: format from the first line when the name does not tell", "[feed][file]") {
  TempDir dir;
  Result<FeedFile> j = FeedFile::open(dir.write("feed.txt", "\n# x\n  {\"time\":0,\"series\":\"a\",\"count\":1}\n"),
                                      ReadOptions{});
  REQUIRE(j.ok());
  CHECK(j->format() == Format::jsonl);
  CHECK(read_all(*j) == std::vector<std::string>{"record 3 1970-01-01T00:00:00Z [a] 1 x1.000000"});

  Result<FeedFile> c = FeedFile::open(dir.write("feed.log", "time,series,count\n0,a,1\n"), ReadOptions{});
  REQUIRE(c.ok());
  CHECK(c->format() == Format::csv);
  CHECK(read_all(*c) == std::vector<std::string>{"record 2 1970-01-01T00:00:00Z [a] 1 x1.000000"});
}

TEST_CASE("feed file: empty and comment-only files yield nothing", "[feed][file]") {
  TempDir dir;
  for (const std::string& content : {std::string(), std::string("# nothing yet\n\n")}) {
    for (const char* name : {"e.csv", "e.jsonl", "e.dat"}) {
      Result<FeedFile> feed = FeedFile::open(dir.write(name, content), ReadOptions{});
      REQUIRE(feed.ok());
      CHECK(read_all(*feed).empty());
    }
  }
}

TEST_CASE("feed file: a byte order mark before the header is ignored", "[feed][file]") {
  TempDir dir;
  CHECK(read_path(dir.write("bom.csv", "\xEF\xBB\xBFtime,series,count\n0,a,1\n")) ==
        std::vector<std::string>{"record 2 1970-01-01T00:00:00Z [a] 1 x1.000000"});
  CHECK(read_path(dir.write("bom.jsonl", "\xEF\xBB\xBF{\"time\":0,\"series\":\"a\",\"count\":1}")) ==
        std::vector<std::string>{"record 1 1970-01-01T00:00:00Z [a] 1 x1.000000"});
}

TEST_CASE("feed file: long lines", "[feed][file]") {
  ReadOptions options;
  options.max_line_bytes = 50;
  options.chunk_bytes = 16;
  auto from_memory = [&](std::string bytes, std::string name) {
    return FeedFile::read_from(std::make_unique<MemorySource>(std::move(bytes)), std::move(name), std::nullopt,
                               options);
  };
  // A long comment is still a comment.
  Result<FeedFile> f = from_memory("#" + std::string(5000, '-') + "\ntime,series,count\n0,a,1\n", "m1");
  REQUIRE(f.ok());
  CHECK(read_all(*f) == std::vector<std::string>{"record 3 1970-01-01T00:00:00Z [a] 1 x1.000000"});
  // A header over the limit cannot be read.
  f = from_memory("time,series,count," + std::string(100, 'c') + "\n0,a,1\n", "m2");
  REQUIRE_FALSE(f.ok());
  CHECK(f.error().message == "m2:1: CSV header is longer than 50 bytes");
  // JSON Lines settled by a first line that is too long: that line is refused.
  f = from_memory("{\"pad\":\"" + std::string(100000, ' ') + "\"}\n{\"time\":0,\"series\":\"a\",\"count\":1}", "m3");
  REQUIRE(f.ok());
  const std::vector<std::string> items = read_all(*f);
  REQUIRE(items.size() == 2);
  CHECK(items[0] == "m3:1: line_too_long: line is longer than 50 bytes and was skipped; it starts '{\"pad\":\"" +
                        std::string(32, ' ') + "...'");
  CHECK(items[1] == "record 2 1970-01-01T00:00:00Z [a] 1 x1.000000");
}

// Gives its bytes, then fails.
class FailingSource final : public ByteSource {
 public:
  explicit FailingSource(std::string bytes) : bytes_(std::move(bytes)) {}
  Result<std::size_t> read(std::span<char> buffer) override {
    if (given_ == bytes_.size()) return Error{"cannot read 'tape': Input/output error"};
    const std::size_t n = std::min(buffer.size(), bytes_.size() - given_);
    std::copy_n(bytes_.data() + given_, n, buffer.data());
    given_ += n;
    return n;
  }

 private:
  std::string bytes_;
  std::size_t given_ = 0;
};

TEST_CASE("feed file: a read failure keeps what was read and says where it stopped", "[feed][file]") {
  ReadOptions options;
  options.chunk_bytes = 5;
  Result<FeedFile> f = FeedFile::read_from(std::make_unique<FailingSource>("time,series,count\n0,a,1\n0,b,2\n0,c"),
                                           "tape", Format::csv, options);
  REQUIRE(f.ok());
  CHECK(read_all(*f) == std::vector<std::string>{
                            "record 2 1970-01-01T00:00:00Z [a] 1 x1.000000",
                            "record 3 1970-01-01T00:00:00Z [b] 2 x1.000000",
                            "tape:4: read_error: cannot read 'tape': Input/output error; the input from this line "
                            "on is lost",
                        });
  Result<FeedFile> early = FeedFile::read_from(std::make_unique<FailingSource>("time,se"), "tape", std::nullopt,
                                               options);
  REQUIRE_FALSE(early.ok());
  CHECK(early.error().message == "cannot read 'tape': Input/output error");
}

TEST_CASE("feed file: options must be at least 1", "[feed][file]") {
  ReadOptions options;
  options.chunk_bytes = 0;
  Result<FeedFile> f = FeedFile::read_from(std::make_unique<MemorySource>(""), "m", Format::csv, options);
  REQUIRE_FALSE(f.ok());
  CHECK(f.error().message == "m: chunk_bytes must be at least 1");
  options = ReadOptions{};
  options.max_line_bytes = 0;
  f = FeedFile::read_from(std::make_unique<MemorySource>(""), "m", Format::csv, options);
  REQUIRE_FALSE(f.ok());
  CHECK(f.error().message == "m: max_line_bytes must be at least 1");
}

}  // namespace
}  // namespace tallyd
