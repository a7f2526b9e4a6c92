#include "core/state_codec.h"

#include <bit>
#include <charconv>

#include <fmt/format.h>

namespace tallyd {

void StateWriter::sep() {
  if (!out_.empty() && out_.back() != '\n') out_ += ' ';
}

void StateWriter::tag(std::string_view word) {
  sep();
  out_ += word;
}

void StateWriter::u64(std::uint64_t v) {
  sep();
  out_ += fmt::format("{}", v);
}

void StateWriter::i64(std::int64_t v) {
  sep();
  out_ += fmt::format("{}", v);
}

void StateWriter::f64(double v) {
  sep();
  out_ += fmt::format("d{:016x}", std::bit_cast<std::uint64_t>(v));
}

void StateWriter::str(std::string_view s) {
  sep();
  out_ += fmt::format("{}:", s.size());
  out_ += s;
}

void StateReader::skip_space() {
  while (pos_ < text_.size() && (text_[pos_] == ' ' || text_[pos_] == '\n')) ++pos_;
}

bool StateReader::at_end() {
  skip_space();
  return pos_ == text_.size();
}

void StateReader::fail(std::string what) {
  if (error_.empty()) error_ = fmt::format("at byte {}: {}", pos_, what);
}

std::string_view StateReader::token() {
  if (failed()) return {};
  skip_space();
  const std::size_t start = pos_;
  while (pos_ < text_.size() && text_[pos_] != ' ' && text_[pos_] != '\n') ++pos_;
  if (start == pos_) fail("unexpected end of state");
  return text_.substr(start, pos_ - start);
}

void StateReader::expect(std::string_view word) {
  std::string_view t = token();
  if (!failed() && t != word) fail(fmt::format("expected '{}', found '{}'", word, t.substr(0, 40)));
}

std::uint64_t StateReader::u64() {
  std::string_view t = token();
  std::uint64_t v = 0;
  if (failed()) return 0;
  auto [p, ec] = std::from_chars(t.data(), t.data() + t.size(), v);
  if (ec != std::errc() || p != t.data() + t.size()) fail(fmt::format("'{}' is not an unsigned integer", t.substr(0, 40)));
  return failed() ? 0 : v;
}

std::int64_t StateReader::i64() {
  std::string_view t = token();
  std::int64_t v = 0;
  if (failed()) return 0;
  auto [p, ec] = std::from_chars(t.data(), t.data() + t.size(), v);
  if (ec != std::errc() || p != t.data() + t.size()) fail(fmt::format("'{}' is not an integer", t.substr(0, 40)));
  return failed() ? 0 : v;
}

double StateReader::f64() {
  std::string_view t = token();
  if (failed()) return 0;
  std::uint64_t bits = 0;
  if (t.size() != 17 || t[0] != 'd') {
    fail(fmt::format("'{}' is not a saved double", t.substr(0, 40)));
    return 0;
  }
  auto [p, ec] = std::from_chars(t.data() + 1, t.data() + t.size(), bits, 16);
  if (ec != std::errc() || p != t.data() + t.size()) {
    fail(fmt::format("'{}' is not a saved double", t));
    return 0;
  }
  return std::bit_cast<double>(bits);
}

std::string StateReader::str() {
  if (failed()) return {};
  skip_space();
  const std::size_t colon = text_.find(':', pos_);
  if (colon == std::string_view::npos || colon - pos_ > 20) {
    fail("expected a string length");
    return {};
  }
  std::uint64_t len = 0;
  auto [p, ec] = std::from_chars(text_.data() + pos_, text_.data() + colon, len);
  if (ec != std::errc() || p != text_.data() + colon) {
    fail("bad string length");
    return {};
  }
  if (len > text_.size() - colon - 1) {
    fail("string runs past the end of the state");
    return {};
  }
  std::string s(text_.substr(colon + 1, len));
  pos_ = colon + 1 + len;
  return s;
}

bool StateReader::boolean() {
  std::uint64_t v = u64();
  if (v > 1) fail("expected 0 or 1");
  return v == 1;
}

}  // namespace tallyd
