#include "core/state_codec.h"

#include <bit>
#include <algorithm>
#include <charconv>
#include <cstring>

#include <fmt/format.h>

namespace tallyd {
namespace {

void put_leb128(std::string& out, std::uint64_t v) {
  while (v >= 0x80) {
    out += static_cast<char>((v & 0x7f) | 0x80);
    v >>= 7;
  }
  out += static_cast<char>(v);
}

std::uint64_t zigzag(std::int64_t v) {
  return (static_cast<std::uint64_t>(v) << 1) ^ static_cast<std::uint64_t>(v >> 63);
}

}  // namespace

std::uint8_t tag_byte(std::string_view word) {
  // FNV-1a folded to a byte: distinct for the tags that follow one another.
  std::uint32_t h = 2166136261u;
  for (unsigned char c : word) h = (h ^ c) * 16777619u;
  return static_cast<std::uint8_t>(h ^ (h >> 8) ^ (h >> 16) ^ (h >> 24));
}

void StateWriter::sep() {
  if (!out_.empty() && out_.back() != '\n') out_ += ' ';
}

void StateWriter::tag(std::string_view word) {
  if (binary_) {
    out_ += static_cast<char>(tag_byte(word));
    return;
  }
  sep();
  out_ += word;
}

void StateWriter::u64(std::uint64_t v) {
  if (binary_) return put_leb128(out_, v);
  sep();
  out_ += fmt::format("{}", v);
}

void StateWriter::i64(std::int64_t v) {
  if (binary_) return put_leb128(out_, zigzag(v));
  sep();
  out_ += fmt::format("{}", v);
}

void StateWriter::f64(double v) {
  if (binary_) {
    const std::uint64_t bits = std::bit_cast<std::uint64_t>(v);
    char le[8];
    for (int i = 0; i < 8; ++i) le[i] = static_cast<char>(bits >> (8 * i));
    out_.append(le, 8);
    return;
  }
  sep();
  out_ += fmt::format("d{:016x}", std::bit_cast<std::uint64_t>(v));
}

void StateWriter::str(std::string_view s) {
  if (binary_) {
    put_leb128(out_, s.size());
    out_ += s;
    return;
  }
  sep();
  out_ += fmt::format("{}:", s.size());
  out_ += s;
}

StateReader::StateReader(StateSource& source, std::size_t total, std::size_t piece)
    : binary_(true), total_(total), source_(&source) {
  buffer_.resize(std::max<std::size_t>(piece, 16));
}

bool StateReader::fill(std::size_t n) {
  if (source_ == nullptr || n > remaining()) return false;
  // Keep the unread bytes, move them to the front, read after them.
  // Moved before the buffer grows: text_ views the buffer, and growing it
  // may move it.
  const std::size_t unread = text_.size() - pos_;
  if (unread != 0 && pos_ != 0) std::memmove(buffer_.data(), text_.data() + pos_, unread);
  if (n > buffer_.size()) buffer_.resize(n);
  base_ += pos_;
  pos_ = 0;
  std::size_t have = unread;
  const std::size_t want = std::min(buffer_.size(), total_ - base_);
  while (have < want) {
    const std::size_t got = source_->read(buffer_.data() + have, want - have);
    if (got == 0) break;
    have += got;
  }
  text_ = std::string_view(buffer_.data(), have);
  return have >= n;
}

std::uint64_t StateReader::leb128() {
  if (failed()) return 0;
  // Most values of a history (flags, counts) fit in one byte.
  if (pos_ < text_.size() && static_cast<std::uint8_t>(text_[pos_]) < 0x80)
    return static_cast<std::uint8_t>(text_[pos_++]);
  std::uint64_t v = 0;
  if (text_.size() - pos_ >= 10) {
    // The longest value is in the buffer: no refill check per byte (a
    // history's time steps take 3 bytes; this loop ran ~47 million times in
    // a restore of 100,000 series). The same value and failure as below.
    const std::size_t bytes = decode_leb128(reinterpret_cast<const unsigned char*>(text_.data()) + pos_, v);
    if (bytes != 0) {
      pos_ += bytes;
      return v;
    }
    pos_ += 10;
    fail("integer longer than 10 bytes");
    return 0;
  }
  for (int shift = 0; shift < 64; shift += 7) {
    if (!have(1)) {
      fail("unexpected end of state");
      return 0;
    }
    const auto byte = static_cast<std::uint8_t>(text_[pos_++]);
    v |= static_cast<std::uint64_t>(byte & 0x7f) << shift;
    if ((byte & 0x80) == 0) return v;
  }
  fail("integer longer than 10 bytes");
  return 0;
}

void StateReader::skip_space() {
  while (pos_ < text_.size() && (text_[pos_] == ' ' || text_[pos_] == '\n')) ++pos_;
}

bool StateReader::at_end() {
  if (!binary_) skip_space();
  return remaining() == 0;
}

void StateReader::fail(std::string what) {
  if (error_.empty()) error_ = fmt::format("at byte {}: {}", base_ + pos_, what);
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
  if (binary_) {
    if (failed()) return;
    if (!have(1)) return fail("unexpected end of state");
    if (static_cast<std::uint8_t>(text_[pos_]) != tag_byte(word))
      return fail(fmt::format("expected the mark of '{}'", word));
    ++pos_;
    return;
  }
  std::string_view t = token();
  if (!failed() && t != word) fail(fmt::format("expected '{}', found '{}'", word, t.substr(0, 40)));
}

std::uint64_t StateReader::u64() {
  if (binary_) return leb128();
  std::string_view t = token();
  std::uint64_t v = 0;
  if (failed()) return 0;
  auto [p, ec] = std::from_chars(t.data(), t.data() + t.size(), v);
  if (ec != std::errc() || p != t.data() + t.size()) fail(fmt::format("'{}' is not an unsigned integer", t.substr(0, 40)));
  return failed() ? 0 : v;
}

std::int64_t StateReader::i64() {
  if (binary_) return unzigzag(leb128());
  std::string_view t = token();
  std::int64_t v = 0;
  if (failed()) return 0;
  auto [p, ec] = std::from_chars(t.data(), t.data() + t.size(), v);
  if (ec != std::errc() || p != t.data() + t.size()) fail(fmt::format("'{}' is not an integer", t.substr(0, 40)));
  return failed() ? 0 : v;
}

double StateReader::f64() {
  if (binary_) {
    if (failed()) return 0;
    if (!have(8)) {
      fail("unexpected end of state");
      return 0;
    }
    const double v = decode_f64(reinterpret_cast<const unsigned char*>(text_.data()) + pos_);
    pos_ += 8;
    return v;
  }
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

void StateReader::f64s(double* into, std::size_t count) {
  // Runs of at most 512 values (4 KiB), each read from the buffer at once
  // when it holds them; otherwise value by value, which fails where f64()
  // would.
  constexpr std::size_t kRun = 512;
  while (count > 0) {
    const std::size_t run = std::min(count, kRun);
    if (binary_ && !failed() && have(run * 8)) {
      const auto* at = reinterpret_cast<const unsigned char*>(text_.data()) + pos_;
      for (std::size_t i = 0; i < run; ++i) into[i] = decode_f64(at + 8 * i);
      pos_ += run * 8;
    } else {
      for (std::size_t i = 0; i < run; ++i) into[i] = f64();
    }
    into += run;
    count -= run;
  }
}

std::string_view StateReader::peek(std::size_t n) {
  if (failed()) return {};
  have(std::min(n, remaining()));
  return text_.substr(pos_);
}

std::string StateReader::str() {
  if (failed()) return {};
  if (binary_) {
    const std::uint64_t len = leb128();
    if (failed()) return {};
    if (len > remaining() || !have(len)) {
      fail("string runs past the end of the state");
      return {};
    }
    std::string s(text_.substr(pos_, len));
    pos_ += len;
    return s;
  }
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
