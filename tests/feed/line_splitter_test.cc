#include "feed/line_splitter.h"

#include <catch2/catch.hpp>

#include <cstdint>
#include <string>
#include <vector>

namespace tallyd {
namespace {

struct Piece {
  SplitKind kind;
  std::string text;
  std::uint64_t number;
  bool operator==(const Piece&) const = default;
};

std::ostream& operator<<(std::ostream& os, const Piece& p) {
  const char* kind = p.kind == SplitKind::line ? "line" : p.kind == SplitKind::too_long ? "too_long" : "need_more";
  return os << "{" << kind << " #" << p.number << " '" << p.text << "'}";
}

// Feeds `input` in chunks of `chunk` bytes, draining after every push, and
// records every piece handed out. Also checks the memory bound on the way.
std::vector<Piece> split_all(std::string_view input, std::size_t max_line, std::size_t chunk) {
  LineSplitter splitter(max_line);
  std::vector<Piece> out;
  for (std::size_t pos = 0; pos < input.size(); pos += chunk) {
    splitter.push(input.substr(pos, chunk));
    CHECK(splitter.buffered_bytes() <= max_line + 1 + chunk);
    for (Split s = splitter.next(); s.kind != SplitKind::need_more; s = splitter.next())
      out.push_back({s.kind, std::string(s.text), s.number});
  }
  for (Split s = splitter.finish(); s.kind != SplitKind::need_more; s = splitter.finish())
    out.push_back({s.kind, std::string(s.text), s.number});
  return out;
}

// An independent statement of the contract: split on '\n', drop one '\r'
// before it, a last piece without '\n' is a line too, longer than the
// limit is too_long with the first max_line bytes as text.
std::vector<Piece> reference(std::string_view input, std::size_t max_line) {
  std::vector<Piece> out;
  std::uint64_t number = 1;
  std::size_t start = 0;
  while (start < input.size()) {
    std::size_t nl = input.find('\n', start);
    const bool terminated = nl != std::string_view::npos;
    if (!terminated) nl = input.size();
    std::string_view line = input.substr(start, nl - start);
    if (!line.empty() && line.back() == '\r') line.remove_suffix(1);
    if (line.size() > max_line)
      out.push_back({SplitKind::too_long, std::string(line.substr(0, max_line)), number});
    else
      out.push_back({SplitKind::line, std::string(line), number});
    ++number;
    start = nl + 1;
  }
  return out;
}

TEST_CASE("splitter hands out lines with their numbers", "[feed][splitter]") {
  const std::vector<Piece> want = {{SplitKind::line, "a", 1}, {SplitKind::line, "", 2}, {SplitKind::line, "bc", 3}};
  CHECK(split_all("a\n\nbc\n", 100, 1000) == want);
  CHECK(split_all("a\n\nbc", 100, 1000) == want);  // last line without '\n'
}

TEST_CASE("splitter drops CRLF line ends but keeps other carriage returns", "[feed][splitter]") {
  const std::vector<Piece> want = {
      {SplitKind::line, "a", 1}, {SplitKind::line, "b\r", 2}, {SplitKind::line, "c\rd", 3}, {SplitKind::line, "e", 4}};
  CHECK(split_all("a\r\nb\r\r\nc\rd\ne\r", 100, 1000) == want);
}

TEST_CASE("splitter gives nothing for empty input", "[feed][splitter]") {
  CHECK(split_all("", 10, 1).empty());
  LineSplitter s(10);
  CHECK(s.next().kind == SplitKind::need_more);
  CHECK(s.finish().kind == SplitKind::need_more);
}

TEST_CASE("splitter limits line length, not counting the line end", "[feed][splitter]") {
  const std::string input = "abcd\nabcde\r\nabcd\r\nxy\nabcdefgh";
  const std::vector<Piece> want = {{SplitKind::line, "abcd", 1},
                                   {SplitKind::too_long, "abcd", 2},
                                   {SplitKind::line, "abcd", 3},
                                   {SplitKind::line, "xy", 4},
                                   {SplitKind::too_long, "abcd", 5}};
  for (std::size_t chunk : {1, 2, 3, 5, 100}) {
    INFO("chunk " << chunk);
    CHECK(split_all(input, 4, chunk) == want);
  }
}

TEST_CASE("splitter reports a long line once and does not buffer it", "[feed][splitter]") {
  const std::size_t max_line = 100;
  const std::size_t chunk = 4096;
  LineSplitter splitter(max_line);
  std::vector<Piece> out;
  auto drain = [&] {
    for (Split s = splitter.next(); s.kind != SplitKind::need_more; s = splitter.next())
      out.push_back({s.kind, std::string(s.text), s.number});
  };
  splitter.push("first\n");
  drain();
  const std::string block(chunk, 'x');
  for (int i = 0; i < 256; ++i) {  // a 1 MiB line
    splitter.push(block);
    drain();
    REQUIRE(splitter.buffered_bytes() <= max_line + 1 + chunk);
  }
  splitter.push("xx\nsecond\nthi");
  drain();
  splitter.push("rd");
  drain();
  for (Split s = splitter.finish(); s.kind != SplitKind::need_more; s = splitter.finish())
    out.push_back({s.kind, std::string(s.text), s.number});
  const std::vector<Piece> want = {{SplitKind::line, "first", 1},
                                   {SplitKind::too_long, std::string(max_line, 'x'), 2},
                                   {SplitKind::line, "second", 3},
                                   {SplitKind::line, "third", 4}};
  CHECK(out == want);
}

TEST_CASE("splitter fed one byte at a time gives what whole-buffer feeding gives", "[feed][splitter]") {
  // Pseudo-random inputs over an alphabet rich in line ends; a fixed
  // linear congruential sequence keeps the test reproducible.
  std::uint32_t state = 12345;
  auto draw = [&](std::uint32_t n) {
    state = state * 1664525u + 1013904223u;
    return (state >> 8) % n;
  };
  const char alphabet[] = {'a', 'b', ' ', '\r', '\n', '\n', '#', '\xC3'};
  for (int round = 0; round < 300; ++round) {
    std::string input;
    const std::uint32_t length = draw(120);
    for (std::uint32_t i = 0; i < length; ++i) input += alphabet[draw(sizeof alphabet)];
    for (std::size_t max_line : {1, 3, 8, 1000}) {
      INFO("input '" << input << "' max " << max_line);
      const std::vector<Piece> want = reference(input, max_line);
      CHECK(split_all(input, max_line, 1) == want);
      CHECK(split_all(input, max_line, 7) == want);
      CHECK(split_all(input, max_line, input.size() + 1) == want);
    }
  }
}

TEST_CASE("splitter line_number follows the input", "[feed][splitter]") {
  LineSplitter s(10);
  CHECK(s.line_number() == 1);
  s.push("a\nb\npartial");
  CHECK(s.next().number == 1);
  CHECK(s.next().number == 2);
  CHECK(s.next().kind == SplitKind::need_more);
  CHECK(s.line_number() == 3);
}

}  // namespace
}  // namespace tallyd
