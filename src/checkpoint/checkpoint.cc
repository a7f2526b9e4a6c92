#include "checkpoint/checkpoint.h"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <sstream>

#include <fmt/format.h>

#include "core/state_codec.h"

namespace tallyd::checkpoint {
namespace {

std::uint64_t fnv1a(std::string_view bytes) {
  std::uint64_t h = 14695981039346656037ull;
  for (unsigned char c : bytes) {
    h ^= c;
    h *= 1099511628211ull;
  }
  return h;
}

Status write_all(int fd, std::string_view data, const std::string& path) {
  while (!data.empty()) {
    ssize_t n = ::write(fd, data.data(), data.size());
    if (n < 0) {
      if (errno == EINTR) continue;
      return Error{fmt::format("{}: cannot write checkpoint: {}", path, std::strerror(errno))};
    }
    data.remove_prefix(static_cast<std::size_t>(n));
  }
  return Ok{};
}

}  // namespace

std::string encode(const Engine& engine, const Marks& marks) {
  StateWriter w;
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
  engine.save_state(w);
  w.newline();
  std::string body = w.take();
  return fmt::format("{}\n{}seal {:016x} {}\n", kFirstLine, body, fnv1a(body), body.size());
}

Status write_file(const std::string& path, const Engine& engine, const Marks& marks) {
  const std::string text = encode(engine, marks);
  const std::string tmp = path + ".tmp";
  int fd = ::open(tmp.c_str(), O_WRONLY | O_CREAT | O_TRUNC | O_CLOEXEC, 0644);
  if (fd < 0) return Error{fmt::format("{}: cannot create checkpoint: {}", tmp, std::strerror(errno))};
  Status st = write_all(fd, text, tmp);
  if (st && ::fsync(fd) != 0) st = Error{fmt::format("{}: fsync failed: {}", tmp, std::strerror(errno))};
  ::close(fd);
  if (!st) return st;
  if (::rename(tmp.c_str(), path.c_str()) != 0)
    return Error{fmt::format("{}: cannot rename checkpoint into place: {}", path, std::strerror(errno))};
  // The rename itself must reach the disk before we rely on it.
  std::string dir = std::filesystem::path(path).parent_path().string();
  if (dir.empty()) dir = ".";
  int dfd = ::open(dir.c_str(), O_RDONLY | O_DIRECTORY | O_CLOEXEC);
  if (dfd >= 0) {
    ::fsync(dfd);
    ::close(dfd);
  }
  return Ok{};
}

Result<Restored> decode(std::string_view text, std::string_view name, const SettingsTable& settings,
                        EngineLimits limits, detect::FdrSpec fdr) {
  const std::size_t eol = text.find('\n');
  if (eol == std::string_view::npos || text.substr(0, eol) != kFirstLine) {
    const std::string_view first = text.substr(0, std::min<std::size_t>(eol, 60));
    // An older or newer tallyd's checkpoint is named as such: the operator
    // decides whether to start fresh (--fresh) or run the version that wrote it.
    const bool other_version = first.substr(0, 18) == "tallyd-checkpoint ";
    return Error{fmt::format("{}: not a tallyd checkpoint of format version 4 (first line is '{}'); "
                             "refusing to load it{}",
                             name, first,
                             other_version ? " (it was written by another tallyd version, whose state this one "
                                             "cannot carry over)"
                                           : "")};
  }
  // The seal is the last line; anything cut short has none (or a wrong one).
  std::string_view rest = text.substr(eol + 1);
  const std::size_t seal_at = rest.rfind("seal ");
  if (seal_at == std::string_view::npos || rest.empty() || rest.back() != '\n' ||
      (seal_at > 0 && rest[seal_at - 1] != '\n'))
    return Error{fmt::format("{}: checkpoint is truncated (no seal line at its end); refusing to load it", name)};
  std::string_view body = rest.substr(0, seal_at);
  StateReader seal(rest.substr(seal_at));
  seal.expect("seal");
  const std::string_view hex = rest.substr(seal_at + 5, 16);
  std::uint64_t sum = 0;
  bool hex_ok = hex.size() == 16;
  for (char c : hex) {
    const int v = (c >= '0' && c <= '9') ? c - '0' : (c >= 'a' && c <= 'f') ? c - 'a' + 10 : -1;
    if (v < 0) hex_ok = false;
    sum = sum * 16 + static_cast<std::uint64_t>(v < 0 ? 0 : v);
  }
  StateReader len_reader(rest.substr(std::min(rest.size(), seal_at + 5 + 16)));
  const std::uint64_t len = len_reader.u64();
  if (!hex_ok || len_reader.failed() || !len_reader.at_end())
    return Error{fmt::format("{}: checkpoint seal line is damaged; refusing to load it", name)};
  if (len != body.size())
    return Error{fmt::format("{}: checkpoint is truncated or damaged ({} body bytes, the seal says {}); "
                             "refusing to load it",
                             name, body.size(), len)};
  if (fnv1a(body) != sum)
    return Error{fmt::format("{}: checkpoint is corrupt (checksum mismatch); refusing to load it", name)};

  StateReader r(body);
  Restored out;
  r.expect("marks");
  out.marks.alert_log_bytes = r.u64();
  out.marks.written_unix = r.i64();
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
    out.marks.files.push_back(std::move(f));
  }
  out.engine = std::make_unique<Engine>(settings, limits, fdr);
  out.engine->load_state(r);
  if (!r.failed() && !r.at_end()) r.fail("unexpected data after the engine state");
  if (r.failed())
    return Error{fmt::format("{}: checkpoint does not match this build or config ({}); refusing to load it", name,
                             r.error())};
  return out;
}

Result<std::optional<Restored>> read_file(const std::string& path, const SettingsTable& settings,
                                          EngineLimits limits, detect::FdrSpec fdr) {
  std::ifstream in(path, std::ios::binary);
  if (!in) {
    if (!std::filesystem::exists(path)) return std::optional<Restored>{};
    return Error{fmt::format("{}: cannot read checkpoint", path)};
  }
  std::ostringstream text;
  text << in.rdbuf();
  auto r = decode(text.str(), path, settings, limits, fdr);
  if (!r) return r.error();
  return std::optional<Restored>{std::move(r).value()};
}

}  // namespace tallyd::checkpoint
