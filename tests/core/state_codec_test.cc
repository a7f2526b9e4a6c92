#include "core/state_codec.h"

#include <bit>
#include <cmath>
#include <limits>

#include <catch2/catch.hpp>

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
