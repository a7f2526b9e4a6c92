#include "feed/field_check.h"

#include <fast_float/fast_float.h>

#include <charconv>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <cstring>

#include "feed/utc_stamp.h"
#include "feed/utf8.h"

namespace tallyd {
namespace {

constexpr std::size_t kMaxQuotedBytes = 40;

// Doubles hold every integer exactly only up to 2^53.
constexpr double kMaxExactWhole = 9007199254740992.0;

enum class Number : std::uint8_t { ok, not_a_number, not_finite };

// Plain decimals ("3", "2.5", "0.125") with at most this many digits: their
// digits as an integer stay below 2^53 and their scale is at most 10^15, so
// both are exact doubles and one division rounds the quotient correctly
// (Clinger 1990, "How to read floating point numbers accurately": the fast
// path for small mantissas and exponents; fast_float takes the same path).
constexpr std::size_t kMaxPlainDigits = 15;
constexpr double kPowersOfTen[kMaxPlainDigits + 1] = {1e0, 1e1, 1e2,  1e3,  1e4,  1e5,  1e6,  1e7,
                                                      1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15};
constexpr std::uint64_t kPowersOfTenWhole[kMaxPlainDigits + 1] = {
    1, 10, 100, 1000, 10000, 100000, 1000000, 10000000, 100000000, 1000000000, 10000000000, 100000000000,
    1000000000000, 10000000000000, 100000000000000, 1000000000000000};

// `text` as digits with at most one '.' between digits, and at most
// kMaxPlainDigits digits: stores its value, correctly rounded, as fast_float
// would, and returns true. False for anything else (signs, exponents, a
// leading or trailing '.', longer numbers): the caller takes the general path.
bool parse_plain_decimal(std::string_view text, double& value) {
  const std::size_t size = text.size();
  if (size == 0 || size > kMaxPlainDigits + 1) return false;
  std::uint64_t digits = 0;
  std::size_t i = 0;
  while (i < size && text[i] >= '0' && text[i] <= '9')
    digits = digits * 10 + static_cast<std::uint64_t>(text[i++] - '0');
  if (i == size) {
    if (size > kMaxPlainDigits) return false;
    value = static_cast<double>(digits);  // exact: below 2^53
    return true;
  }
  if (i == 0 || text[i] != '.') return false;
  const std::uint64_t whole = digits;
  const std::size_t point = i++;
  while (i < size && text[i] >= '0' && text[i] <= '9')
    digits = digits * 10 + static_cast<std::uint64_t>(text[i++] - '0');
  const std::size_t fraction_digits = i - point - 1;
  if (fraction_digits == 0 || i < size || size - 1 > kMaxPlainDigits) return false;
  // A whole value written with a zero fraction ("2.0", common for efforts)
  // is its whole part exactly; the division is the slow step otherwise.
  if (digits == whole * kPowersOfTenWhole[fraction_digits]) {
    value = static_cast<double>(whole);
  } else {
    value = static_cast<double>(digits) / kPowersOfTen[fraction_digits];
  }
  return true;
}

// The whole of `text` as a double (no blanks, no leading '+'). "nan", "inf"
// and values beyond the range of a double ("1e999") are not_finite.
Number parse_real(std::string_view text, double& value) {
  if (parse_plain_decimal(text, value)) return Number::ok;
  if (text.empty()) return Number::not_a_number;
  const char* end = text.data() + text.size();
  auto [ptr, ec] = fast_float::from_chars(text.data(), end, value);
  if (ec != std::errc() || ptr != end) return Number::not_a_number;
  return std::isfinite(value) ? Number::ok : Number::not_finite;
}

// True when `text` spells NaN or infinity as a word rather than overflowing.
bool is_word(std::string_view text) { return text.find_first_of("nNiI") != std::string_view::npos; }

enum class Whole : std::uint8_t { ok, not_a_number, not_whole, too_large };

// Up to 18 decimal digits and nothing else always fit an int64.
constexpr std::size_t kMaxPlainWholeDigits = 18;

// The usual count, "17": 1 to kMaxPlainWholeDigits decimal digits and
// nothing else, read here as std::from_chars would read it. False (`out`
// untouched) for anything else.
bool parse_plain_whole(std::string_view text, std::int64_t& out) {
  if (text.size() - 1 >= kMaxPlainWholeDigits) return false;  // empty, or too long
  std::int64_t n = 0;
  for (char c : text) {
    if (c < '0' || c > '9') return false;
    n = n * 10 + (c - '0');
  }
  out = n;
  return true;
}

// A whole number in integer, decimal or exponent form, as int64.
Whole parse_whole(std::string_view text, std::int64_t& out) {
  if (text.empty()) return Whole::not_a_number;
  if (parse_plain_whole(text, out)) return Whole::ok;
  const char* end = text.data() + text.size();
  auto [ptr, ec] = std::from_chars(text.data(), end, out);
  if (ptr == end) return ec == std::errc() ? Whole::ok : Whole::too_large;
  double value = 0;
  switch (parse_real(text, value)) {
    case Number::ok: break;
    case Number::not_a_number: return Whole::not_a_number;
    case Number::not_finite: return is_word(text) ? Whole::not_a_number : Whole::too_large;
  }
  if (value != std::floor(value)) return Whole::not_whole;
  if (std::fabs(value) >= kMaxExactWhole) return Whole::too_large;
  out = static_cast<std::int64_t>(value);
  return Whole::ok;
}

// True when every byte of `text` is printable ASCII (0x20-0x7E), tested
// eight bytes at a time: an id is usually a dozen bytes or so.
bool all_printable_ascii(std::string_view text) {
  constexpr std::uint64_t kHigh = 0x8080808080808080ULL;
  // With every byte below 0x80, adding 0x60 to each sets its high bit exactly
  // when it is >= 0x20, and adding 0x01 exactly when it is 0x7F; no byte's
  // sum reaches 0x100 (0x7F + 0x60 = 0xDF), so none carries into the next.
  const auto printable = [](std::uint64_t w) {
    return (w & kHigh) == 0 && ((w + 0x6060606060606060ULL) & kHigh) == kHigh &&
           ((w + 0x0101010101010101ULL) & kHigh) == 0;
  };
  const std::size_t n = text.size();
  if (n < 8) {
    for (char c : text)
      if (static_cast<unsigned char>(c - 0x20) >= 0x5F) return false;
    return true;
  }
  std::uint64_t w;
  for (std::size_t i = 0; i + 8 <= n; i += 8) {
    std::memcpy(&w, text.data() + i, 8);
    if (!printable(w)) return false;
  }
  // The last eight bytes (overlapping the last whole word when n is not a
  // multiple of eight: those bytes are tested twice).
  std::memcpy(&w, text.data() + n - 8, 8);
  return printable(w);
}

FieldFault fault(RejectReason reason, std::string detail) { return FieldFault{reason, std::move(detail)}; }

// True when the digits before any exponent are not all zero.
bool has_nonzero_mantissa(std::string_view text) {
  for (char c : text) {
    if (c == 'e' || c == 'E') break;
    if (c >= '1' && c <= '9') return true;
  }
  return false;
}

}  // namespace

std::string quote_value(std::string_view text) {
  std::string out = "'";
  std::size_t pos = 0;
  while (pos < text.size()) {
    const unsigned char c = static_cast<unsigned char>(text[pos]);
    std::size_t length = 1;
    if (c >= 0x80) length = utf8_sequence_length(text, pos);
    if (pos + (length == 0 ? 1 : length) > kMaxQuotedBytes) break;
    if (c >= 0x20 && c < 0x7F) {
      out += static_cast<char>(c);
    } else if (length > 1) {
      out.append(text.substr(pos, length));
    } else {
      char hex[8];
      std::snprintf(hex, sizeof hex, "\\x%02X", c);
      out += hex;
      length = 1;
    }
    pos += length;
  }
  if (pos < text.size()) out += "...";
  out += "'";
  return out;
}

std::string_view trim_blanks(std::string_view text) {
  std::size_t b = 0, e = text.size();
  while (b < e && (text[b] == ' ' || text[b] == '\t')) ++b;
  while (e > b && (text[e - 1] == ' ' || text[e - 1] == '\t')) --e;
  return text.substr(b, e - b);
}

bool is_blank_or_comment(std::string_view line) {
  std::string_view t = trim_blanks(line);
  return t.empty() || t.front() == '#';
}

namespace {

// The checks below each take the usual value in a few instructions and
// leave everything else to one of these, kept out of line: the message
// building they need would otherwise make every call pay for saving
// registers it does not use.

[[gnu::noinline]] FieldCheck check_unusual_series(std::string_view text) {
  if (trim_blanks(text).empty()) return fault(RejectReason::bad_series, "series id is empty");
  if (const std::size_t bad = utf8_error_offset(text); bad != std::string_view::npos)
    return fault(RejectReason::bad_format, "series id " + quote_value(text) + " is not valid UTF-8 (byte " +
                                               std::to_string(bad + 1) + ")");
  for (char ch : text) {
    const unsigned char c = static_cast<unsigned char>(ch);
    if (c < 0x20 || c == 0x7F)
      return fault(RejectReason::bad_format, "series id " + quote_value(text) + " contains a control character");
  }
  return std::nullopt;
}

[[gnu::noinline]] FieldCheck read_unusual_count(std::string_view text, std::int64_t& count) {
  if (text.empty()) return fault(RejectReason::bad_count, "count is empty");
  std::int64_t n = 0;
  const Whole w = parse_whole(text, n);
  // A negative value is reported as such even when it is also fractional.
  if (w != Whole::not_a_number && text.front() == '-' && has_nonzero_mantissa(text))
    return fault(RejectReason::bad_count, "count " + quote_value(text) + " is negative");
  switch (w) {
    case Whole::ok: count = n; return std::nullopt;  // negatives were refused above; "-0" is 0
    case Whole::not_a_number:
      return fault(RejectReason::bad_count, "count " + quote_value(text) + " is not a number");
    case Whole::not_whole:
      return fault(RejectReason::bad_count, "count " + quote_value(text) + " is not a whole number");
    case Whole::too_large:
      return fault(RejectReason::bad_count, "count " + quote_value(text) + " is too large");
  }
  return fault(RejectReason::bad_count, "count " + quote_value(text) + " is not a number");
}

[[gnu::noinline]] FieldCheck read_unusual_exposure(std::string_view text, double& exposure) {
  // An exposure column with an empty cell means the effort was not recorded:
  // such a count can be neither judged nor learned (only an absent column
  // means the default of 1).
  if (text.empty())
    return fault(RejectReason::missing_exposure, "exposure is empty: the effort behind this count is unknown");
  double value = 0;
  switch (parse_real(text, value)) {
    case Number::ok: break;
    case Number::not_a_number:
      return fault(RejectReason::bad_exposure, "exposure " + quote_value(text) + " is not a number");
    case Number::not_finite:
      return fault(RejectReason::bad_exposure, "exposure " + quote_value(text) + " is not finite");
  }
  if (value < 0) return fault(RejectReason::bad_exposure, "exposure " + quote_value(text) + " is negative");
  if (value == 0) {
    if (has_nonzero_mantissa(text))
      return fault(RejectReason::bad_exposure, "exposure " + quote_value(text) + " is too small to represent");
    return fault(RejectReason::zero_exposure, "exposure " + quote_value(text) + " is zero: no effort to judge");
  }
  exposure = value;
  return std::nullopt;
}

}  // namespace

FieldCheck check_series(std::string_view text) {
  // The usual id is printable ASCII and does not start with a space: then it
  // is good. Anything else (tabs, bytes >= 0x7F, controls, a leading space
  // that might begin an all-blank id) takes the full checks.
  if (!text.empty() && text[0] != ' ' && all_printable_ascii(text)) return std::nullopt;
  return check_unusual_series(text);
}

FieldCheck read_time(std::string_view text, TimePoint& time) {
  if (read_utc_stamp(text, time)) return std::nullopt;  // the usual layout; the rest below
  Result<TimePoint> parsed = parse_time(text);
  if (!parsed) return fault(RejectReason::bad_time, parsed.error().message);
  time = *parsed;
  return std::nullopt;
}

FieldCheck read_epoch_number(std::string_view number_text, TimePoint& time) {
  std::int64_t seconds = 0;
  switch (parse_whole(number_text, seconds)) {
    case Whole::ok: time = TimePoint{Seconds{seconds}}; return std::nullopt;
    case Whole::not_a_number:
      return fault(RejectReason::bad_time, "time " + quote_value(number_text) + " is not a number");
    case Whole::not_whole:
      return fault(RejectReason::bad_time,
                   "time " + quote_value(number_text) + " is not a whole number of epoch seconds");
    case Whole::too_large:
      return fault(RejectReason::bad_time, "time " + quote_value(number_text) + " is out of range");
  }
  return fault(RejectReason::bad_time, "time " + quote_value(number_text) + " is not a number");
}

FieldCheck read_count(std::string_view text, std::int64_t& count) {
  // The usual count, "17", before any other check.
  if (parse_plain_whole(text, count)) return std::nullopt;
  return read_unusual_count(text, count);
}

FieldCheck read_exposure(std::string_view text, double& exposure) {
  // The usual effort, "2" or "1.5": a plain positive decimal, accepted at once.
  double value = 0;
  if (parse_plain_decimal(text, value) && value > 0) {
    exposure = value;
    return std::nullopt;
  }
  return read_unusual_exposure(text, exposure);
}

FieldCheck read_covariate(std::string_view name, std::string_view text, double& value) {
  double v = 0;
  switch (parse_real(text, v)) {
    case Number::ok: value = v; return std::nullopt;
    case Number::not_a_number: break;
    case Number::not_finite:
      return fault(RejectReason::bad_covariate,
                   "covariate " + quote_value(name) + " value " + quote_value(text) + " is not finite");
  }
  return fault(RejectReason::bad_covariate,
               "covariate " + quote_value(name) + " value " + quote_value(text) + " is not a number");
}

}  // namespace tallyd

