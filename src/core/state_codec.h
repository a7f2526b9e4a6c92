// StateWriter / StateReader: the token layout shared by every piece of saved
// state (series models, engine, checkpoint file).
//
// Layout: whitespace-separated tokens, written one logical item per line for
// people reading a checkpoint with `less`:
//   unsigned / signed integers   decimal ("42", "-7")
//   doubles                      "d" + 16 lower-case hex digits of the IEEE-754
//                                bit pattern ("d3ff0000000000000" is 1.0), so a
//                                restored value is bit-for-bit the saved one,
//                                NaN payloads and signed zeros included
//   strings                      "<byte length>:" then the raw bytes (any bytes)
//   tags                         a bare word checked on reading ("series", "fit")
// Reading never throws: the first mismatch sets an error naming the token
// position, and every later read returns a zero value.
#pragma once

#include <cstdint>
#include <string>
#include <string_view>

namespace tallyd {

class StateWriter {
 public:
  void tag(std::string_view word);
  void u64(std::uint64_t v);
  void i64(std::int64_t v);
  void f64(double v);
  void str(std::string_view s);
  void boolean(bool b) { u64(b ? 1 : 0); }
  void newline() { out_ += '\n'; }

  const std::string& text() const { return out_; }
  std::string take() { return std::move(out_); }

 private:
  void sep();
  std::string out_;
};

class StateReader {
 public:
  explicit StateReader(std::string_view text) : text_(text) {}

  // Fails unless the next token is exactly `word`.
  void expect(std::string_view word);
  std::uint64_t u64();
  std::int64_t i64();
  double f64();
  std::string str();
  bool boolean();

  // Records a failure (the first one wins), e.g. a value out of range.
  void fail(std::string what);
  bool failed() const { return !error_.empty(); }
  const std::string& error() const { return error_; }
  // True when only whitespace is left.
  bool at_end();

 private:
  std::string_view token();
  void skip_space();
  std::string_view text_;
  std::size_t pos_ = 0;
  std::string error_;
};

}  // namespace tallyd
