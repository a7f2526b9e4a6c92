#include "checkpoint/parts.h"

#include <charconv>

#include <fmt/format.h>
#include <xxhash.h>

namespace tallyd::checkpoint {

void save_marks(StateWriter& w, const Marks& marks) {
  w.tag("marks");
  w.u64(marks.alert_log_bytes);
  w.i64(marks.written_unix);
  w.u64(marks.files.size());
  w.newline();
  for (const FileMark& f : marks.files) {
    w.tag("file");
    w.str(f.path);
    w.u64(f.device);
    w.u64(f.inode);
    w.u64(f.offset);
    w.u64(f.line);
    w.i64(f.format);
    w.str(f.header);
    w.newline();
  }
}

Marks load_marks(StateReader& r) {
  Marks out;
  r.expect("marks");
  out.alert_log_bytes = r.u64();
  out.written_unix = r.i64();
  const std::uint64_t nfiles = r.u64();
  if (nfiles > 100000) r.fail("too many file marks");
  for (std::uint64_t i = 0; i < nfiles && !r.failed(); ++i) {
    FileMark f;
    r.expect("file");
    f.path = r.str();
    f.device = r.u64();
    f.inode = r.u64();
    f.offset = r.u64();
    f.line = r.u64();
    f.format = static_cast<int>(r.i64());
    f.header = r.str();
    if (f.format < -1 || f.format > 1) r.fail("bad file format code");
    out.files.push_back(std::move(f));
  }
  return out;
}

std::uint64_t section_checksum(std::string_view bytes) { return XXH3_64bits(bytes.data(), bytes.size()); }

std::string section_line(std::string_view name, std::string_view bytes) {
  return fmt::format("{} {} {:016x}\n", name, bytes.size(), section_checksum(bytes));
}

Result<std::string_view> take_section(std::string_view& rest, std::string_view name, std::string_view file) {
  const std::size_t eol = rest.find('\n');
  // A section line is short: one that never ends was cut off, unless the
  // bytes that follow are plainly not one.
  if (eol == std::string_view::npos && rest.size() < name.size() + 40)
    return Error{fmt::format("{}: checkpoint is truncated (it ends inside the line of its {} section); "
                             "refusing to load it",
                             file, name)};
  const std::string_view line = rest.substr(0, std::min(eol, rest.size()));
  auto damaged = [&] {
    return Error{fmt::format("{}: checkpoint is corrupt (the line of its {} section should read "
                             "'{} <bytes> <checksum>', it reads '{}'); refusing to load it",
                             file, name, name, line.substr(0, 60))};
  };
  if (eol == std::string_view::npos || line.size() < name.size() + 1 || line.substr(0, name.size()) != name ||
      line[name.size()] != ' ')
    return damaged();
  const char* p = line.data() + name.size() + 1;
  const char* end = line.data() + line.size();
  std::uint64_t bytes = 0;
  auto [after_bytes, ec1] = std::from_chars(p, end, bytes);
  if (ec1 != std::errc() || after_bytes == end || *after_bytes != ' ' || end - after_bytes != 17) return damaged();
  std::uint64_t sum = 0;
  auto [after_sum, ec2] = std::from_chars(after_bytes + 1, end, sum, 16);
  if (ec2 != std::errc() || after_sum != end) return damaged();
  rest.remove_prefix(eol + 1);
  if (bytes > rest.size())
    return Error{fmt::format("{}: checkpoint is truncated (its {} section is {} bytes, only {} are left); "
                             "refusing to load it",
                             file, name, bytes, rest.size())};
  const std::string_view section = rest.substr(0, bytes);
  rest.remove_prefix(bytes);
  if (section_checksum(section) != sum)
    return Error{fmt::format("{}: checkpoint is corrupt (its {} section does not match its checksum); "
                             "refusing to load it",
                             file, name)};
  return section;
}

}  // namespace tallyd::checkpoint
