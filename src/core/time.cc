#include "core/time.h"

#include <charconv>
#include <cmath>
#include <cstdint>
#include <cstdio>

namespace tallyd {
namespace {

// Reads exactly `n` digits at `pos`; advances pos. Returns -1 on failure.
int read_digits(std::string_view s, std::size_t& pos, int n) {
  if (pos + n > s.size()) return -1;
  int v = 0;
  for (int i = 0; i < n; ++i) {
    char c = s[pos + i];
    if (c < '0' || c > '9') return -1;
    v = v * 10 + (c - '0');
  }
  pos += n;
  return v;
}

bool expect(std::string_view s, std::size_t& pos, char c) {
  if (pos < s.size() && s[pos] == c) {
    ++pos;
    return true;
  }
  return false;
}

// Quotes at most 40 bytes of `text`; anything but printable ASCII is shown as
// \xNN so that junk from a feed cannot break a log line.
std::string shown_text(std::string_view text) {
  constexpr std::size_t kMaxShown = 40;
  std::string out;
  for (std::size_t i = 0; i < text.size() && i < kMaxShown; ++i) {
    unsigned char c = static_cast<unsigned char>(text[i]);
    if (c >= 0x20 && c < 0x7F) {
      out += static_cast<char>(c);
    } else {
      char hex[8];
      std::snprintf(hex, sizeof hex, "\\x%02X", c);
      out += hex;
    }
  }
  if (text.size() > kMaxShown) out += "...";
  return out;
}

Error time_error(std::string_view text, std::string_view why) {
  return Error{"time '" + shown_text(text) + "' " + std::string(why) +
               " (want RFC 3339 like 2025-06-01T06:00:00Z, or epoch seconds)"};
}

}  // namespace

Result<TimePoint> parse_time(std::string_view text) {
  if (text.empty()) return time_error(text, "is empty");

  // Integer epoch seconds: optional sign, digits only.
  bool all_digits = true;
  for (std::size_t i = 0; i < text.size(); ++i) {
    char c = text[i];
    if (!((c >= '0' && c <= '9') || (i == 0 && c == '-'))) {
      all_digits = false;
      break;
    }
  }
  if (all_digits) {
    std::int64_t secs = 0;
    auto [ptr, ec] = std::from_chars(text.data(), text.data() + text.size(), secs);
    if (ec != std::errc() || ptr != text.data() + text.size())
      return time_error(text, "is not a valid epoch second count");
    return TimePoint{Seconds{secs}};
  }

  std::size_t pos = 0;
  int y = read_digits(text, pos, 4);
  if (y < 0 || !expect(text, pos, '-')) return time_error(text, "has no valid year");
  int mo = read_digits(text, pos, 2);
  if (mo < 1 || mo > 12 || !expect(text, pos, '-')) return time_error(text, "has no valid month");
  int d = read_digits(text, pos, 2);
  if (d < 1) return time_error(text, "has no valid day");
  if (pos >= text.size() || !(text[pos] == 'T' || text[pos] == 't' || text[pos] == ' '))
    return time_error(text, "has no time of day");
  ++pos;
  int hh = read_digits(text, pos, 2);
  if (hh < 0 || hh > 23 || !expect(text, pos, ':')) return time_error(text, "has no valid hour");
  int mm = read_digits(text, pos, 2);
  if (mm < 0 || mm > 59 || !expect(text, pos, ':')) return time_error(text, "has no valid minute");
  int ss = read_digits(text, pos, 2);
  if (ss < 0 || ss > 60) return time_error(text, "has no valid second");  // 60: leap second, folded below
  if (pos < text.size() && text[pos] == '.') {
    ++pos;
    std::size_t start = pos;
    while (pos < text.size() && text[pos] >= '0' && text[pos] <= '9') ++pos;
    if (pos == start) return time_error(text, "has an empty fraction of a second");
  }
  if (pos >= text.size()) return time_error(text, "has no UTC offset (add Z or +hh:mm)");
  int offset_minutes = 0;
  if (text[pos] == 'Z' || text[pos] == 'z') {
    ++pos;
  } else if (text[pos] == '+' || text[pos] == '-') {
    int sign = text[pos] == '+' ? 1 : -1;
    ++pos;
    int oh = read_digits(text, pos, 2);
    if (oh < 0 || oh > 23 || !expect(text, pos, ':')) return time_error(text, "has a bad UTC offset");
    int om = read_digits(text, pos, 2);
    if (om < 0 || om > 59) return time_error(text, "has a bad UTC offset");
    offset_minutes = sign * (oh * 60 + om);
  } else {
    return time_error(text, "has a bad UTC offset");
  }
  if (pos != text.size()) return time_error(text, "has trailing characters");

  using namespace std::chrono;
  year_month_day ymd{year{y}, month{static_cast<unsigned>(mo)}, day{static_cast<unsigned>(d)}};
  if (!ymd.ok()) return time_error(text, "is not a calendar date");
  if (ss == 60) {
    // A leap second can only be the last second of a UTC day; POSIX time has
    // no leap seconds, so it is folded into the second before it.
    int utc_minute_of_day = ((hh * 60 + mm - offset_minutes) % 1440 + 1440) % 1440;
    if (utc_minute_of_day != 23 * 60 + 59) return time_error(text, "has second 60 outside a leap second");
    ss = 59;
  }
  sys_seconds t = sys_days{ymd} + hours{hh} + minutes{mm} + seconds{ss} - minutes{offset_minutes};
  return t;
}

std::string format_time(TimePoint t) {
  using namespace std::chrono;
  sys_days days = floor<std::chrono::days>(t);
  year_month_day ymd{days};
  hh_mm_ss hms{t - days};
  char buf[40];
  std::snprintf(buf, sizeof buf, "%04d-%02u-%02uT%02d:%02d:%02dZ", static_cast<int>(ymd.year()),
                static_cast<unsigned>(ymd.month()), static_cast<unsigned>(ymd.day()),
                static_cast<int>(hms.hours().count()), static_cast<int>(hms.minutes().count()),
                static_cast<int>(hms.seconds().count()));
  return buf;
}

Result<Seconds> parse_duration(std::string_view text) {
  auto fail = [&](std::string_view why) {
    return Error{"duration '" + std::string(text.substr(0, 40)) + "' " + std::string(why) +
                 " (want e.g. 90m, 12h, 7d, 2w, 1y, 1d12h)"};
  };
  if (text.empty()) return fail("is empty");
  std::int64_t total = 0;
  std::size_t pos = 0;
  while (pos < text.size()) {
    std::size_t start = pos;
    while (pos < text.size() && ((text[pos] >= '0' && text[pos] <= '9') || text[pos] == '.')) ++pos;
    if (pos == start) return fail("needs a number before each unit");
    double value = 0;
    auto [ptr, ec] = std::from_chars(text.data() + start, text.data() + pos, value);
    if (ec != std::errc() || ptr != text.data() + pos) return fail("has a bad number");
    if (pos >= text.size()) return fail("needs a unit after the number");
    double unit = 0;
    switch (text[pos]) {
      case 's': unit = 1; break;
      case 'm': unit = 60; break;
      case 'h': unit = 3600; break;
      case 'd': unit = kSecondsPerDay; break;
      case 'w': unit = 7 * kSecondsPerDay; break;
      case 'y': unit = kDaysPerYear * kSecondsPerDay; break;
      default: return fail("has an unknown unit");
    }
    ++pos;
    // Bound each part and the sum well inside int64 before converting: a
    // double beyond the range of the target type makes the cast undefined.
    constexpr double kMaxSeconds = 1e15;  // about 31.7 million years
    double part = std::round(value * unit);
    if (!(part <= kMaxSeconds) || static_cast<double>(total) + part > kMaxSeconds)
      return fail("is too long");
    total += static_cast<std::int64_t>(part);
  }
  if (total <= 0) return fail("must be positive");
  return Seconds{total};
}

std::string format_duration(Seconds d) {
  const std::int64_t s = d.count();
  const std::int64_t year = static_cast<std::int64_t>(kDaysPerYear * kSecondsPerDay);
  struct Unit { std::int64_t seconds; char suffix; };
  for (Unit u : {Unit{year, 'y'}, Unit{604800, 'w'}, Unit{86400, 'd'}, Unit{3600, 'h'}, Unit{60, 'm'}}) {
    if (s != 0 && s % u.seconds == 0) return std::to_string(s / u.seconds) + u.suffix;
  }
  return std::to_string(s) + "s";
}

}  // namespace tallyd
