// StateWriter / StateReader: the two layouts shared by every piece of saved
// state (series models, engine, checkpoint file). The code that saves or
// loads a piece of state is the same for both; only the encoding differs.
//
// Text layout (checkpoint format 4, and the readable head of format 5):
// whitespace-separated tokens, one logical item per line for people reading
// a checkpoint with `less`:
//   unsigned / signed integers   decimal ("42", "-7")
//   doubles                      "d" + 16 lower-case hex digits of the IEEE-754
//                                bit pattern ("d3ff0000000000000" is 1.0), so a
//                                restored value is bit-for-bit the saved one,
//                                NaN payloads and signed zeros included
//   strings                      "<byte length>:" then the raw bytes (any bytes)
//   tags                         a bare word checked on reading ("series", "fit")
//
// Binary layout (the bulk section of checkpoint format 5), byte order fixed
// (little-endian) whatever the host's:
//   unsigned integers   LEB128: 7 bits a byte, low bits first, the top bit
//                       set on every byte but the last (1 byte below 128,
//                       at most 10)
//   signed integers     zigzag (0, -1, 1, -2 ... map to 0, 1, 2, 3 ...), then LEB128
//   doubles             the 8 bytes of the IEEE-754 bit pattern, little-endian
//   strings             LEB128 byte length, then the raw bytes
//   tags                1 byte derived from the word (tag_byte), checked on
//                       reading: it catches a reader out of step, not damage
//                       (the checkpoint's checksums do that)
//   newline             nothing
//
// Reading never throws: the first mismatch sets an error naming the byte
// position, and every later read returns a zero value.
#pragma once

#include <bit>
#include <cstddef>
#include <cstdint>
#include <memory>
#include <string>
#include <string_view>

namespace tallyd {

class BulkMemory;

enum class StateLayout { text, binary };

class StateWriter {
 public:
  explicit StateWriter(StateLayout layout = StateLayout::text) : binary_(layout == StateLayout::binary) {}

  bool binary() const { return binary_; }
  void tag(std::string_view word);
  void u64(std::uint64_t v);
  void i64(std::int64_t v);
  void f64(double v);
  void str(std::string_view s);
  void boolean(bool b) { u64(b ? 1 : 0); }
  void newline() {
    if (!binary_) out_ += '\n';
  }

  const std::string& text() const { return out_; }
  std::string take() { return std::move(out_); }

 private:
  void sep();
  bool binary_;
  std::string out_;
};

// Where a streaming StateReader gets the bytes of its state piece by piece
// (a checkpoint body read from its file without holding all of it).
class StateSource {
 public:
  virtual ~StateSource() = default;
  // Writes up to `max` of the next bytes to `into` and returns how many; 0
  // only at the end (or on a read error, which the source keeps).
  virtual std::size_t read(char* into, std::size_t max) = 0;
};

class StateReader {
 public:
  explicit StateReader(std::string_view text, StateLayout layout = StateLayout::text)
      : text_(text), binary_(layout == StateLayout::binary), total_(text.size()) {}
  // Binary layout only: reads a state of `total` bytes from `source`
  // through a buffer of `piece` bytes (larger only while one string needs
  // more), so that the whole state is never in memory at once. Values may
  // straddle pieces. A state that ends before `total` bytes fails as
  // "unexpected end of state".
  StateReader(StateSource& source, std::size_t total, std::size_t piece);

  bool binary() const { return binary_; }
  // Fails unless the next token is exactly `word`.
  void expect(std::string_view word);
  std::uint64_t u64();
  std::int64_t i64();
  double f64();
  // `count` doubles into `into`: the same values and failure as `count`
  // calls of f64(), read in runs where the bytes are buffered.
  void f64s(double* into, std::size_t count);
  std::string str();
  bool boolean();

  // Binary layout, for a decoder of many small values at once (a series'
  // history, series_state.cc): the unread bytes in the reader's buffer, at
  // least min(n, remaining()) of them unless the source ends early (a
  // streaming reader refills for them); empty after a failure. Nothing is
  // consumed until skip(k) consumes the first k of them (k <= the view's
  // size), and the view is valid until the next read.
  std::string_view peek(std::size_t n);
  void skip(std::size_t k) { pos_ += k; }

  // Records a failure (the first one wins), e.g. a value out of range.
  void fail(std::string what);
  bool failed() const { return !error_.empty(); }
  const std::string& error() const { return error_; }
  // True when nothing is left (text: only whitespace).
  bool at_end();
  // Bytes not read yet (an upper bound on what the state still holds).
  std::size_t remaining() const { return total_ - (base_ + pos_); }
  // Memory that loaders may carve what they restore out of
  // (core/bulk_memory.h), keeping the shared_ptr while they use it; nullptr
  // (the default) when they should allocate as usual.
  void offer_memory(std::shared_ptr<BulkMemory> memory) { memory_ = std::move(memory); }
  const std::shared_ptr<BulkMemory>& memory() const { return memory_; }

 private:
  std::string_view token();
  void skip_space();
  std::uint64_t leb128();
  // True once at least `n` unread bytes are in text_ (a streaming reader
  // refills its buffer for them; see fill).
  bool have(std::size_t n) { return text_.size() - pos_ >= n || fill(n); }
  bool fill(std::size_t n);
  std::string_view text_;  // the state, or the buffered piece of a streamed one
  bool binary_;
  std::size_t pos_ = 0;
  std::size_t total_;         // bytes of the whole state
  std::size_t base_ = 0;      // bytes of the state before text_ (streaming)
  StateSource* source_ = nullptr;
  std::string buffer_;        // streaming: text_ views its first bytes
  std::string error_;
  std::shared_ptr<BulkMemory> memory_;
};

// The byte a binary tag is written as.
std::uint8_t tag_byte(std::string_view word);

// Decodes one binary unsigned integer (LEB128) at `at`, which must have 10
// readable bytes: its bytes (1 to 10) and the value into `v`, or 0 when it
// is longer than 10 bytes. The same value StateReader::u64 reads.
inline std::size_t decode_leb128(const unsigned char* at, std::uint64_t& v) {
  v = 0;
  for (int i = 0; i < 10; ++i) {
    v |= static_cast<std::uint64_t>(at[i] & 0x7f) << (7 * i);
    if ((at[i] & 0x80) == 0) return static_cast<std::size_t>(i) + 1;
  }
  return 0;
}

// A binary signed integer from its LEB128 value (zigzag): StateReader::i64's.
inline std::int64_t unzigzag(std::uint64_t v) {
  return static_cast<std::int64_t>(v >> 1) ^ -static_cast<std::int64_t>(v & 1);
}

// A binary double from its 8 little-endian bytes at `at`: StateReader::f64's.
inline double decode_f64(const unsigned char* at) {
  std::uint64_t bits = 0;
  for (int i = 0; i < 8; ++i) bits |= static_cast<std::uint64_t>(at[i]) << (8 * i);
  return std::bit_cast<double>(bits);
}

}  // namespace tallyd
