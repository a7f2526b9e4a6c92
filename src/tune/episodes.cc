#include "tune/episodes.h"

#include <fmt/format.h>

#include <fstream>
#include <sstream>

namespace tallyd::tune {
namespace {

std::string_view trim(std::string_view s) {
  while (!s.empty() && (s.front() == ' ' || s.front() == '\t')) s.remove_prefix(1);
  while (!s.empty() && (s.back() == ' ' || s.back() == '\t' || s.back() == '\r')) s.remove_suffix(1);
  return s;
}

std::vector<std::string_view> split_commas(std::string_view line) {
  std::vector<std::string_view> out;
  std::size_t from = 0;
  while (true) {
    const std::size_t comma = line.find(',', from);
    out.push_back(trim(line.substr(from, comma == std::string_view::npos ? std::string_view::npos : comma - from)));
    if (comma == std::string_view::npos) break;
    from = comma + 1;
  }
  return out;
}

}  // namespace

Result<std::vector<Episode>> parse_episodes(std::string_view text, std::string_view source_name) {
  std::vector<Episode> episodes;
  bool header_seen = false;
  std::uint64_t line_no = 0;
  std::size_t pos = 0;
  while (pos <= text.size()) {
    const std::size_t nl = text.find('\n', pos);
    std::string_view line = text.substr(pos, nl == std::string_view::npos ? std::string_view::npos : nl - pos);
    pos = (nl == std::string_view::npos) ? text.size() + 1 : nl + 1;
    ++line_no;
    if (line_no == 1 && line.substr(0, 3) == "\xEF\xBB\xBF") line.remove_prefix(3);  // a BOM from spreadsheets
    line = trim(line);
    if (line.empty() || line.front() == '#') continue;
    const auto where = [&](const std::string& why) {
      return Error{fmt::format("{}:{}: {}", source_name, line_no, why)};
    };
    const std::vector<std::string_view> f = split_commas(line);
    if (!header_seen) {
      if (f.size() != 3 || f[0] != "series" || f[1] != "start" || f[2] != "end")
        return where(fmt::format("expected the header 'series,start,end', found '{}'", line));
      header_seen = true;
      continue;
    }
    if (f.size() != 3) return where(fmt::format("expected 3 fields (series,start,end), found {}", f.size()));
    if (f[0].empty()) return where("empty series id");
    auto start = parse_time(f[1]);
    if (!start) return where("start: " + start.error().message);
    auto end = parse_time(f[2]);
    if (!end) return where("end: " + end.error().message);
    if (*end < *start) return where(fmt::format("end {} is before start {}", f[2], f[1]));
    episodes.push_back(Episode{std::string(f[0]), *start, *end});
  }
  if (!header_seen) return Error{fmt::format("{}: empty events file (expected at least the header 'series,start,end')", source_name)};
  return episodes;
}

Result<std::vector<Episode>> load_episodes(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) return Error{fmt::format("{}: cannot read the events file", path)};
  std::ostringstream text;
  text << in.rdbuf();
  if (in.bad()) return Error{fmt::format("{}: reading the events file failed", path)};
  return parse_episodes(text.str(), path);
}

}  // namespace tallyd::tune
