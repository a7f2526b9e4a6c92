#include "core/state_codec.h"

#include <algorithm>
#include <bit>
#include <cmath>
#include <cstring>
#include <limits>
#include <string>
#include <vector>

#include <catch2/catch.hpp>

#include "support/piece_source.h"

using namespace tallyd;

TEST_CASE("saved doubles come back bit for bit", "[state]") {
  // IEEE-754 special values (common practice: signed zero, subnormals, NaN payloads).
  const double values[] = {0.0, -0.0, 1.0, 0.1, -2.5e-310, std::numeric_limits<double>::denorm_min(),
                           std::numeric_limits<double>::max(), std::numeric_limits<double>::infinity(),
                           -std::numeric_limits<double>::infinity(), std::bit_cast<double>(0x7ff8000000000123ull),
                           3.141592653589793};
  StateWriter w;
  for (double v : values) w.f64(v);
  StateReader r(w.text());
  for (double v : values) CHECK(std::bit_cast<std::uint64_t>(r.f64()) == std::bit_cast<std::uint64_t>(v));
  CHECK_FALSE(r.failed());
  CHECK(r.at_end());
}

TEST_CASE("strings of any bytes, integers and tags round-trip", "[state]") {
  StateWriter w;
  w.tag("series");
  w.str(std::string("a b\nc\0d:", 8));
  w.str("");
  w.i64(-42);
  w.u64(18446744073709551615ull);
  w.newline();
  w.boolean(true);
  StateReader r(w.text());
  r.expect("series");
  CHECK(r.str() == std::string("a b\nc\0d:", 8));
  CHECK(r.str().empty());
  CHECK(r.i64() == -42);
  CHECK(r.u64() == 18446744073709551615ull);
  CHECK(r.boolean());
  CHECK_FALSE(r.failed());
  CHECK(r.at_end());
}

TEST_CASE("a state cut short or of the wrong shape is an error, never a guess", "[state]") {
  StateWriter w;
  w.tag("fit");
  w.f64(1.5);
  w.str("hello");
  const std::string full = w.text();
  for (std::size_t cut = 0; cut < full.size(); ++cut) {
    StateReader r(std::string_view(full).substr(0, cut));
    r.expect("fit");
    r.f64();
    r.str();
    CHECK(r.failed());
  }
  StateReader wrong("fit x");
  wrong.expect("fit");
  wrong.f64();
  CHECK(wrong.failed());
  CHECK_THAT(wrong.error(), Catch::Contains("not a saved double"));
}

namespace {

std::string bytes_of(std::initializer_list<unsigned> list) {
  std::string out;
  for (unsigned b : list) out += static_cast<char>(b);
  return out;
}

}  // namespace

TEST_CASE("binary layout: LEB128, zigzag and little-endian doubles, byte for byte", "[state]") {
  // Unsigned LEB128 examples of the DWARF 4 standard (2010), section 7.6
  // (2, 127, 128, 129, 12857; from memory); zigzag as in the Protocol
  // Buffers encoding of sint64 (0, -1, 1, -2; from memory); 1.0 as an
  // IEEE-754 binary64 is 0x3ff0000000000000 (common practice).
  StateWriter w(StateLayout::binary);
  for (std::uint64_t v : {2ull, 127ull, 128ull, 129ull, 12857ull}) w.u64(v);
  for (std::int64_t v : {0ll, -1ll, 1ll, -2ll}) w.i64(v);
  w.f64(1.0);
  w.str("ab");
  w.newline();
  w.boolean(true);
  CHECK(w.text() == bytes_of({0x02, 0x7f, 0x80, 0x01, 0x81, 0x01, 0xb9, 0x64, 0x00, 0x01, 0x02, 0x03, 0x00, 0x00,
                              0x00, 0x00, 0x00, 0x00, 0xf0, 0x3f, 0x02, 'a', 'b', 0x01}));
}

TEST_CASE("binary layout round-trips every value the text layout does", "[state]") {
  const double values[] = {0.0, -0.0, 1.0, -2.5e-310, std::numeric_limits<double>::infinity(),
                           std::bit_cast<double>(0x7ff8000000000123ull)};
  StateWriter w(StateLayout::binary);
  w.tag("series");
  w.str(std::string("a b\nc\0d:", 8));
  w.str("");
  for (std::int64_t v : {std::numeric_limits<std::int64_t>::min(), std::int64_t{-42}, std::int64_t{0},
                         std::numeric_limits<std::int64_t>::max()})
    w.i64(v);
  w.u64(18446744073709551615ull);
  for (double v : values) w.f64(v);
  w.boolean(false);
  StateReader r(w.text(), StateLayout::binary);
  r.expect("series");
  CHECK(r.str() == std::string("a b\nc\0d:", 8));
  CHECK(r.str().empty());
  CHECK(r.i64() == std::numeric_limits<std::int64_t>::min());
  CHECK(r.i64() == -42);
  CHECK(r.i64() == 0);
  CHECK(r.i64() == std::numeric_limits<std::int64_t>::max());
  CHECK(r.u64() == 18446744073709551615ull);
  for (double v : values) CHECK(std::bit_cast<std::uint64_t>(r.f64()) == std::bit_cast<std::uint64_t>(v));
  CHECK_FALSE(r.boolean());
  CHECK_FALSE(r.failed());
  CHECK(r.at_end());
}

TEST_CASE("binary layout: cut short, a wrong tag or an endless integer is an error", "[state]") {
  StateWriter w(StateLayout::binary);
  w.tag("fit");
  w.u64(1ull << 40);
  w.f64(1.5);
  w.str("hello");
  const std::string full = w.text();
  for (std::size_t cut = 0; cut < full.size(); ++cut) {
    StateReader r(std::string_view(full).substr(0, cut), StateLayout::binary);
    r.expect("fit");
    r.u64();
    r.f64();
    r.str();
    CHECK(r.failed());
  }
  StateReader wrong(full, StateLayout::binary);
  wrong.expect("history");
  CHECK(wrong.failed());
  CHECK_THAT(wrong.error(), Catch::Contains("'history'"));
  const std::string endless(11, static_cast<char>(0x80));
  StateReader long_int(endless, StateLayout::binary);
  long_int.u64();
  CHECK(long_int.failed());
}

// The reader decodes an integer with ten or more bytes left in its buffer
// in one loop without refill checks, and byte by byte nearer the end: both
// must read the same values, and refuse the same 11-byte integer.
TEST_CASE("binary layout: an integer reads the same far from and near the end of the state", "[state]") {
  const std::uint64_t values[] = {0, 1, 127, 128, 172800, 1ull << 35, 1ull << 63, 18446744073709551615ull};
  for (std::uint64_t v : values) {
    INFO("value " << v);
    StateWriter alone(StateLayout::binary);
    alone.u64(v);
    StateReader near_end(alone.text(), StateLayout::binary);
    CHECK(near_end.u64() == v);
    CHECK_FALSE(near_end.failed());
    StateWriter padded(StateLayout::binary);
    padded.u64(v);
    for (int i = 0; i < 10; ++i) padded.u64(0);
    StateReader far(padded.text(), StateLayout::binary);
    CHECK(far.u64() == v);
    CHECK(far.u64() == 0);
    CHECK_FALSE(far.failed());
  }
  // Nine continuation bytes and a last one: 2^63 in ten bytes, read either way.
  std::string ten(9, static_cast<char>(0x80));
  ten += '\x01';
  StateReader ten_alone(ten, StateLayout::binary);
  CHECK(ten_alone.u64() == 1ull << 63);
  const std::string ten_then_zeros = ten + std::string(10, '\0');  // the reader views its text
  StateReader ten_padded(ten_then_zeros, StateLayout::binary);
  CHECK(ten_padded.u64() == 1ull << 63);
  CHECK_FALSE(ten_padded.failed());
  // Ten continuation bytes: an error however much follows.
  for (std::size_t after : {0, 1, 20}) {
    const std::string text = std::string(10, static_cast<char>(0x80)) + std::string(after, '\0');
    StateReader endless(text, StateLayout::binary);
    endless.u64();
    CHECK(endless.failed());
  }
}

using tallyd::testing::PieceSource;

// f64s reads runs of doubles from the buffer where it holds them and value by
// value elsewhere: the same values, and where the state is cut short the
// same error at the same byte as calls of f64().
TEST_CASE("binary layout: doubles read in runs equal doubles read one by one", "[state]") {
  StateWriter w(StateLayout::binary);
  std::vector<double> values;
  for (int i = 0; i < 1300; ++i) values.push_back(i % 7 == 0 ? -0.0 : 1.0 / (i + 1) - 3.0 * i);
  w.u64(7);
  for (double v : values) w.f64(v);
  const std::string full = w.text();
  for (std::size_t cut : {full.size(), full.size() - 1, std::size_t{1 + 8 * 600 + 3}, std::size_t{5}}) {
    for (std::size_t piece : {std::size_t{0}, std::size_t{1}, std::size_t{13}, std::size_t{4096}}) {
      INFO("cut " << cut << " piece " << piece);
      const std::string_view state = std::string_view(full).substr(0, cut);
      StateReader one(state, StateLayout::binary);
      CHECK(one.u64() == 7);
      std::vector<double> by_one(values.size());
      for (double& v : by_one) v = one.f64();
      PieceSource source(state, piece == 0 ? state.size() : piece);
      StateReader streamed(source, state.size(), piece == 0 ? 16 : piece);
      StateReader whole(state, StateLayout::binary);
      for (StateReader* runs : {&whole, &streamed}) {
        CHECK(runs->u64() == 7);
        std::vector<double> in_runs(values.size(), 99.0);
        runs->f64s(in_runs.data(), in_runs.size());
        CHECK(runs->failed() == one.failed());
        CHECK(runs->error() == one.error());
        for (std::size_t i = 0; i < values.size(); ++i)
          REQUIRE(std::bit_cast<std::uint64_t>(in_runs[i]) == std::bit_cast<std::uint64_t>(by_one[i]));
      }
      if (cut == full.size()) {
        CHECK_FALSE(one.failed());
        CHECK(std::bit_cast<std::uint64_t>(by_one[0]) == std::bit_cast<std::uint64_t>(-0.0));
        CHECK(by_one.back() == values.back());
      }
    }
  }
}

// peek() shows the buffered bytes without consuming them, refilling a
// streaming reader for as many as asked (or all that are left); skip()
// consumes them, and reading goes on after them.
TEST_CASE("binary layout: peek shows what is buffered and skip consumes it", "[state]") {
  StateWriter w(StateLayout::binary);
  for (std::uint64_t i = 0; i < 200; ++i) w.u64(i);  // one byte each below 128, two above
  w.u64(1ull << 40);
  const std::string full = w.text();
  PieceSource source(full, 5);
  StateReader r(source, full.size(), 16);
  const std::string_view first = r.peek(40);  // more than the buffer holds: it grows
  REQUIRE(first.size() >= 40);
  CHECK(first.substr(0, 3) == std::string_view("\x00\x01\x02", 3));
  CHECK(r.u64() == 0);  // nothing was consumed
  r.skip(2);            // the bytes of 1 and 2
  CHECK(r.u64() == 3);
  std::string_view rest = r.peek(full.size());  // everything left
  CHECK(rest.size() == r.remaining());
  CHECK(r.peek(1 << 20).size() == r.remaining());  // asking beyond the end gives what is left
  for (std::uint64_t i = 4; i < 200; ++i) REQUIRE(r.u64() == i);
  CHECK(r.u64() == 1ull << 40);
  CHECK(r.at_end());
  CHECK(r.peek(10).empty());
  StateReader whole(full, StateLayout::binary);
  CHECK(whole.peek(1).size() == full.size());  // a whole state is all buffered
  whole.fail("stop");
  CHECK(whole.peek(1).empty());  // nothing after a failure
}

// A value longer than a streaming reader's buffer grows the buffer; the
// bytes not read yet must move with it (they were lost when the buffer
// moved before they did).
TEST_CASE("binary layout: a string longer than a streaming reader's buffer reads whole", "[state]") {
  std::string long_string;
  for (int i = 0; i < 300; ++i) long_string += static_cast<char>('a' + i % 26);
  StateWriter w(StateLayout::binary);
  w.u64(5);
  w.str(long_string);
  w.u64(300);
  const std::string full = w.text();
  for (std::size_t piece : {std::size_t{1}, std::size_t{16}, std::size_t{17}, std::size_t{64}}) {
    INFO("piece " << piece);
    PieceSource source(full, piece);
    StateReader r(source, full.size(), piece);
    CHECK(r.u64() == 5);
    CHECK(r.str() == long_string);
    CHECK(r.u64() == 300);
    CHECK_FALSE(r.failed());
    CHECK(r.at_end());
  }
}
