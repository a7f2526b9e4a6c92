#include "feed/utc_stamp.h"

#include <cstdint>

namespace tallyd {
namespace {

// The two digits at text[at], text[at + 1] as a number, or -1.
int two_digits(std::string_view text, std::size_t at) {
  const unsigned hi = static_cast<unsigned char>(text[at]) - '0';
  const unsigned lo = static_cast<unsigned char>(text[at + 1]) - '0';
  if (hi > 9 || lo > 9) return -1;
  return static_cast<int>(hi * 10 + lo);
}

bool is_leap_year(int y) { return y % 4 == 0 && (y % 100 != 0 || y % 400 == 0); }

int days_in_month(int y, int m) {
  static constexpr int kDays[12] = {31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31};
  return m == 2 && is_leap_year(y) ? 29 : kDays[m - 1];
}

// Days from 1970-01-01 to y-m-d in the proleptic Gregorian calendar
// (Hinnant, "chrono-Compatible Low-Level Date Algorithms", days_from_civil:
// the algorithm behind std::chrono's sys_days from year_month_day).
std::int64_t days_from_civil(int y, int m, int d) {
  y -= m <= 2 ? 1 : 0;
  const int era = (y >= 0 ? y : y - 399) / 400;
  const int yoe = y - era * 400;                                 // [0, 399]
  const int doy = (153 * (m + (m > 2 ? -3 : 9)) + 2) / 5 + d - 1;  // [0, 365]
  const int doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;         // [0, 146096]
  return static_cast<std::int64_t>(era) * 146097 + doe - 719468;
}

}  // namespace

bool read_utc_stamp(std::string_view text, TimePoint& time) {
  // 0123456789012345678 9
  // 2025-06-01T06:00:00 Z
  if (text.size() != 20 || text[4] != '-' || text[7] != '-' || text[10] != 'T' || text[13] != ':' ||
      text[16] != ':' || text[19] != 'Z')
    return false;
  const int century = two_digits(text, 0), year_in_century = two_digits(text, 2);
  const int month = two_digits(text, 5), day = two_digits(text, 8);
  const int hour = two_digits(text, 11), minute = two_digits(text, 14), second = two_digits(text, 17);
  if (century < 0 || year_in_century < 0 || month < 1 || month > 12 || day < 1 || hour < 0 || hour > 23 ||
      minute < 0 || minute > 59 || second < 0 || second > 59)
    return false;
  const int year = century * 100 + year_in_century;
  if (day > days_in_month(year, month)) return false;
  const std::int64_t seconds = days_from_civil(year, month, day) * 86400 + hour * 3600 + minute * 60 + second;
  time = TimePoint{Seconds{seconds}};
  return true;
}

}  // namespace tallyd
