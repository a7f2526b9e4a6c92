#include "feed/utf8.h"

#include <catch2/catch.hpp>

#include <string>

namespace tallyd {
namespace {

TEST_CASE("well-formed UTF-8 is accepted", "[feed][utf8]") {
  CHECK(is_valid_utf8(""));
  CHECK(is_valid_utf8("trap-4 north"));
  CHECK(is_valid_utf8("Fallenstation M\xC3\xBChlbach"));     // U+00FC
  CHECK(is_valid_utf8("\xE2\x82\xAC"));                        // U+20AC
  CHECK(is_valid_utf8("\xF0\x9F\x90\x9D"));                    // U+1F41D
  CHECK(is_valid_utf8("\xF4\x8F\xBF\xBF"));                    // U+10FFFF, the last code point
  CHECK(is_valid_utf8(std::string("a\0b", 3)));                // NUL is a character
}

TEST_CASE("malformed UTF-8 is found at its first bad byte", "[feed][utf8]") {
  CHECK(utf8_error_offset("ab\xFF") == 2);
  CHECK(utf8_error_offset("\x80") == 0);                 // a lone continuation byte
  CHECK(utf8_error_offset("a\xC3") == 1);                // cut short
  CHECK(utf8_error_offset("\xC0\xAF") == 0);             // overlong '/'
  CHECK(utf8_error_offset("\xE0\x80\xAF") == 0);         // overlong, three bytes
  CHECK(utf8_error_offset("\xF0\x80\x80\xAF") == 0);     // overlong, four bytes
  CHECK(utf8_error_offset("x\xED\xA0\x80") == 1);        // U+D800, a surrogate
  CHECK(utf8_error_offset("\xF4\x90\x80\x80") == 0);     // above U+10FFFF
  CHECK(utf8_error_offset("\xE2\x82") == 0);             // cut short
  CHECK(utf8_error_offset("\xE2\x28\xA1") == 0);         // bad continuation
}

TEST_CASE("utf8_sequence_length measures one sequence", "[feed][utf8]") {
  CHECK(utf8_sequence_length("a", 0) == 1);
  CHECK(utf8_sequence_length("\xC3\xBC!", 0) == 2);
  CHECK(utf8_sequence_length("\xE2\x82\xAC", 0) == 3);
  CHECK(utf8_sequence_length("\xF0\x9F\x90\x9D", 0) == 4);
  CHECK(utf8_sequence_length("\xF0\x9F\x90", 0) == 0);
}

}  // namespace
}  // namespace tallyd
