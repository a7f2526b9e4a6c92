#include "series/model_spec.h"

namespace tallyd {

std::string_view to_string(Direction d) {
  switch (d) {
    case Direction::high: return "high";
    case Direction::low: return "low";
    case Direction::both: return "both";
  }
  return "both";
}

std::optional<Direction> parse_direction(std::string_view text) {
  if (text == "high") return Direction::high;
  if (text == "low") return Direction::low;
  if (text == "both") return Direction::both;
  return std::nullopt;
}

const SeriesSettings& SettingsTable::for_series(std::string_view series) const {
  for (const SettingsRule& rule : rules)
    if (glob_match(rule.match, series)) return rule.settings;
  return defaults;
}

bool glob_match(std::string_view pattern, std::string_view text) {
  // Iterative matcher with single-star backtracking: linear in practice, no recursion.
  std::size_t p = 0, t = 0, star = std::string_view::npos, mark = 0;
  while (t < text.size()) {
    if (p < pattern.size() && (pattern[p] == '?' || pattern[p] == text[t])) {
      ++p;
      ++t;
    } else if (p < pattern.size() && pattern[p] == '*') {
      star = p++;
      mark = t;
    } else if (star != std::string_view::npos) {
      p = star + 1;
      t = ++mark;
    } else {
      return false;
    }
  }
  while (p < pattern.size() && pattern[p] == '*') ++p;
  return p == pattern.size();
}

}  // namespace tallyd
