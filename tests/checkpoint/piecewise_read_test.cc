#include "checkpoint/piecewise_read.h"

#include <filesystem>
#include <fstream>
#include <string>
#include <vector>

#include <catch2/catch.hpp>
#include <fmt/format.h>

#include "checkpoint/parts.h"
#include "config/config.h"
#include "feed/feed_file.h"

using namespace tallyd;

namespace {

MonitorConfig moth_config() {
  auto c = load_config(std::string(TALLYD_SOURCE_DIR) + "/config/moth_traps.toml");
  REQUIRE(c);
  return std::move(c).value();
}

void feed_moth_records(Engine& engine, std::size_t n) {
  auto feed = FeedFile::open(std::string(TALLYD_SOURCE_DIR) + "/demo_feeds/moth_traps.csv", ReadOptions{});
  REQUIRE(feed);
  FeedItem item;
  for (std::size_t i = 0; i < n && feed->next(item);)
    if (item.is_record()) {
      engine.ingest(item.record());
      ++i;
    }
}

void write_bytes(const std::string& path, std::string_view bytes) {
  std::ofstream out(path, std::ios::binary | std::ios::trunc);
  out.write(bytes.data(), static_cast<std::streamsize>(bytes.size()));
}

// The same file with its body replaced by `body` and the body's line
// carrying the right checksum for it: sound as far as checksums can tell.
std::string with_body(const std::string& text, const std::string& body) {
  const std::size_t body_line = text.find("\nbody ") + 1;
  const std::size_t body_start = text.find('\n', body_line) + 1;
  return text.substr(0, body_line) + checkpoint::section_line("body", body) + body + "\nend\n";
}

}  // namespace

// read_file decodes the body as it reads it. For every file, sound or
// damaged, it must come to decode()'s verdict on the whole file, in the same
// words, whatever the piece size (pieces of 1 and 7 bytes split every value
// of the body across reads).
TEST_CASE("reading a checkpoint in pieces gives decode's verdict on the whole file", "[checkpoint]") {
  const MonitorConfig config = moth_config();
  Engine engine(config.settings, config.limits);
  feed_moth_records(engine, 500);
  checkpoint::Marks marks;
  marks.files.push_back({"/var/feeds/a.csv", 1, 2, 300, 12, 0, "time,series,count"});
  const std::string text = checkpoint::encode(engine, marks);
  const std::size_t body_line = text.find("\nbody ") + 1;
  const std::size_t body_start = text.find('\n', body_line) + 1;
  const std::size_t body_end = text.size() - 5;
  const std::string body = text.substr(body_start, body_end - body_start);
  REQUIRE(body.size() > 1000);

  std::vector<std::pair<std::string, std::string>> files;  // what, bytes
  files.emplace_back("sound", text);
  for (std::size_t at : {body_start, body_start + 1, body_start + 200, (body_start + body_end) / 2, body_end - 1}) {
    std::string flipped = text;
    flipped[at] ^= 0x01;
    files.emplace_back(fmt::format("body byte {} flipped", at), flipped);
  }
  std::string head_flipped = text;
  head_flipped[text.find("/var/feeds/a.csv")] = 'V';
  files.emplace_back("head flipped", head_flipped);
  std::string line_bad = text;
  line_bad[body_line + 1] = 'O';
  files.emplace_back("body line damaged", line_bad);
  files.emplace_back("trailing byte", text + "x");
  std::string end_bad = text;
  end_bad[text.size() - 2] = 'N';
  files.emplace_back("end line damaged", end_bad);
  for (std::size_t cut : {std::size_t{0}, std::size_t{5}, std::size_t{22}, body_line - 3, body_line + 3,
                          body_start + 1, (body_start + body_end) / 2, body_end - 1, body_end, text.size() - 1})
    files.emplace_back(fmt::format("cut at {}", cut), text.substr(0, cut));
  // Checksums right, content wrong: a body cut short, one with a byte more,
  // one with a damaged series mark.
  files.emplace_back("short body, right checksum", with_body(text, body.substr(0, body.size() / 2)));
  files.emplace_back("long body, right checksum", with_body(text, body + "x"));
  std::string marked = body;
  marked[marked.size() / 3] ^= 0x40;
  files.emplace_back("changed body, right checksum", with_body(text, marked));
  files.emplace_back("format 4", checkpoint::encode_format4(engine, marks));
  files.emplace_back("foreign", "hello\n");

  const std::string path = (std::filesystem::temp_directory_path() / "tallyd_piecewise_test.ckpt").string();
  for (const auto& [what, bytes] : files) {
    write_bytes(path, bytes);
    auto whole = checkpoint::decode(bytes, path, config.settings, config.limits);
    for (std::size_t piece : {std::size_t{1}, std::size_t{7}, std::size_t{4096}, std::size_t{1} << 20}) {
      INFO(what << ", pieces of " << piece);
      auto read = checkpoint::read_file_in_pieces(path, config.settings, config.limits, {}, piece);
      REQUIRE(bool(read) == bool(whole));
      if (!whole) {
        CHECK(read.error().message == whole.error().message);
        continue;
      }
      REQUIRE(read->has_value());
      CHECK(checkpoint::encode(*(*read)->engine, (*read)->marks) == checkpoint::encode(*whole->engine, whole->marks));
    }
  }
  // The sound file, restored in pieces, is the engine that was written.
  write_bytes(path, text);
  auto back = checkpoint::read_file_in_pieces(path, config.settings, config.limits, {}, 7);
  REQUIRE(back);
  REQUIRE(back->has_value());
  CHECK(checkpoint::encode(*(*back)->engine, marks) == text);
  std::filesystem::remove(path);
  auto none = checkpoint::read_file_in_pieces(path, config.settings, config.limits, {}, 7);
  REQUIRE(none);
  CHECK_FALSE(none->has_value());
}
