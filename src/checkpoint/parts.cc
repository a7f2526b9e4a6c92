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

namespace {

Error damaged_line(std::string_view line, std::string_view name, std::string_view file) {
  return Error{fmt::format("{}: checkpoint is corrupt (the line of its {} section should read "
                           "'{} <bytes> <checksum>', it reads '{}'); refusing to load it",
                           file, name, name, line.substr(0, 60))};
}

}  // namespace

Result<SectionLine> parse_section_line(std::string_view line, std::string_view name, std::string_view file) {
  auto damaged = [&] { return damaged_line(line, name, file); };
  if (line.size() < name.size() + 1 || line.substr(0, name.size()) != name || line[name.size()] != ' ')
    return damaged();
  const char* p = line.data() + name.size() + 1;
  const char* end = line.data() + line.size();
  SectionLine out;
  auto [after_bytes, ec1] = std::from_chars(p, end, out.bytes);
  if (ec1 != std::errc() || after_bytes == end || *after_bytes != ' ' || end - after_bytes != 17) return damaged();
  auto [after_sum, ec2] = std::from_chars(after_bytes + 1, end, out.checksum, 16);
  if (ec2 != std::errc() || after_sum != end) return damaged();
  return out;
}

Error checksum_mismatch(std::string_view name, std::string_view file) {
  return Error{fmt::format("{}: checkpoint is corrupt (its {} section does not match its checksum); "
                           "refusing to load it",
                           file, name)};
}

Status check_end(std::string_view rest, std::string_view file) {
  if (rest == kEndLine) return Ok{};
  if (rest.size() < kEndLine.size() && kEndLine.substr(0, rest.size()) == rest)
    return Error{fmt::format("{}: checkpoint is truncated (no end line); refusing to load it", file)};
  return Error{fmt::format("{}: checkpoint is corrupt ({} unexpected bytes after its last section); "
                           "refusing to load it",
                           file, rest.size())};
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
  if (eol == std::string_view::npos) return damaged_line(line, name, file);
  auto parsed = parse_section_line(line, name, file);
  if (!parsed) return parsed.error();
  const std::uint64_t bytes = parsed->bytes;
  rest.remove_prefix(eol + 1);
  if (bytes > rest.size())
    return Error{fmt::format("{}: checkpoint is truncated (its {} section is {} bytes, only {} are left); "
                             "refusing to load it",
                             file, name, bytes, rest.size())};
  const std::string_view section = rest.substr(0, bytes);
  rest.remove_prefix(bytes);
  if (section_checksum(section) != parsed->checksum) return checksum_mismatch(name, file);
  return section;
}

}  // namespace tallyd::checkpoint
