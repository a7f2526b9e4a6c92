#include "checkpoint/checkpoint.h"

#include <fcntl.h>
#include <sys/stat.h>
#include <sys/uio.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <cstring>
#include <filesystem>

#include <fmt/format.h>

#include "checkpoint/format4.h"
#include "checkpoint/format5.h"
#include "checkpoint/parts.h"
#include "checkpoint/piecewise_read.h"
#include "core/bulk_memory.h"
#include "core/state_codec.h"

namespace tallyd::checkpoint {
namespace {

// The two sections of a format-5 file.
struct Sections {
  std::string head;  // text
  std::string body;  // binary
};

Sections make_sections(const Engine& engine, const Marks& marks) {
  StateWriter head;
  save_marks(head, marks);
  // For people reading the file; decode checks them against the body.
  head.tag("counts");
  head.u64(engine.series_count());
  head.u64(engine.counters().records);
  head.u64(engine.held_count());
  head.newline();
  StateWriter body(StateLayout::binary);
  engine.save_state(body);
  return {head.take(), body.take()};
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

Error mismatch(std::string_view name, std::string_view section, const std::string& what) {
  return Error{fmt::format("{}: checkpoint does not match this build or config ({} section, {}); "
                           "refusing to load it",
                           name, section, what)};
}

Result<Restored> decode_format5(std::string_view rest, std::string_view name, const SettingsTable& settings,
                                EngineLimits limits, detect::FdrSpec fdr) {
  auto head_bytes = take_section(rest, "head", name);
  if (!head_bytes) return head_bytes.error();
  auto body_bytes = take_section(rest, "body", name);
  if (!body_bytes) return body_bytes.error();
  if (Status end = check_end(rest, name); !end) return end.error();
  // Sound as far as the checksums can tell: now the content must fit this build and config.
  auto head = read_head(*head_bytes, name);
  if (!head) return head.error();
  StateReader body(*body_bytes, StateLayout::binary);
  return restore_body(body, body_bytes->size(), *head, name, settings, limits, fdr);
}

}  // namespace

Result<Head> read_head(std::string_view head_bytes, std::string_view name) {
  StateReader head(head_bytes);
  Head out;
  out.marks = load_marks(head);
  head.expect("counts");
  out.series = head.u64();
  out.records = head.u64();
  out.held = head.u64();
  if (!head.failed() && !head.at_end()) head.fail("unexpected data after the counts");
  if (head.failed()) return mismatch(name, "head", head.error());
  return out;
}

Result<Restored> restore_body(StateReader& body, std::size_t body_size, Head head, std::string_view name,
                              const SettingsTable& settings, EngineLimits limits, detect::FdrSpec fdr) {
  // The series' models and histories go into one mapping of huge pages,
  // prefaulted in chunks (core/bulk_memory.h): page faults were most of a
  // restore. A record takes at least 3 bytes of the body and 8 to 40 in
  // memory (series_model.h; the bound allows 32), a covariate and a value
  // of a fit 8 in both, a fit's flag 1 in both, a model its size, its two
  // map nodes (engine.h; under 256 bytes) and the alignment of its pieces
  // (the head's count, checked against the body below; a count beyond the
  // body's bytes cannot be true); the bound only
  // reserves address space, and what is not used is given back at once.
  // Its pages are prefaulted on a thread of its own while this one decodes
  // (core/bulk_memory.h): fresh memory costs about as much as decoding.
  const std::size_t models = static_cast<std::size_t>(std::min<std::uint64_t>(head.series, body_size));
  const std::shared_ptr<BulkMemory> histories = BulkMemory::create(
      body_size / 3 * 32 + body_size + models * (sizeof(SeriesModel) + 256 + 4 * 64), /*prefault_ahead=*/true);
  body.offer_memory(histories);
  Restored out;
  out.marks = std::move(head.marks);
  out.engine = std::make_unique<Engine>(settings, limits, fdr);
  out.engine->load_state(body);
  if (histories) histories->trim();
  if (!body.failed() && !body.at_end()) body.fail("unexpected data after the engine state");
  if (body.failed()) return mismatch(name, "body", body.error());
  if (out.engine->series_count() != head.series || out.engine->counters().records != head.records ||
      out.engine->held_count() != head.held)
    return mismatch(name, "head",
                    fmt::format("its counts say {} series, {} records, {} held; the body has {}, {}, {}",
                                head.series, head.records, head.held, out.engine->series_count(),
                                out.engine->counters().records, out.engine->held_count()));
  return out;
}

std::string encode(const Engine& engine, const Marks& marks) {
  const Sections s = make_sections(engine, marks);
  std::string out;
  out.reserve(kFirstLine.size() + s.head.size() + s.body.size() + 100);
  out += kFirstLine;
  out += '\n';
  out += section_line("head", s.head);
  out += s.head;
  out += section_line("body", s.body);
  out += s.body;
  out += kEndLine;
  return out;
}

std::string encode_format4(const Engine& engine, const Marks& marks) {
  return std::string(kFormat4Line) + "\n" + format4_rest(engine, marks);
}

Status write_file(const std::string& path, const Engine& engine, const Marks& marks) {
  const Sections s = make_sections(engine, marks);
  const std::string first = std::string(kFirstLine) + "\n" + section_line("head", s.head);
  const std::string body_line = section_line("body", s.body);
  const std::string tmp = path + ".tmp";
  int fd = ::open(tmp.c_str(), O_WRONLY | O_CREAT | O_TRUNC | O_CLOEXEC, 0644);
  if (fd < 0) return Error{fmt::format("{}: cannot create checkpoint: {}", tmp, std::strerror(errno))};
  Status st = Ok{};
  for (std::string_view piece : {std::string_view(first), std::string_view(s.head), std::string_view(body_line),
                                 std::string_view(s.body), kEndLine})
    if (st) st = write_all(fd, piece, tmp);
  if (st && ::fsync(fd) != 0) st = Error{fmt::format("{}: fsync failed: {}", tmp, std::strerror(errno))};
  ::close(fd);
  if (!st) return st;
  if (::rename(tmp.c_str(), path.c_str()) != 0)
    return Error{fmt::format("{}: cannot rename checkpoint into place: {}", path, std::strerror(errno))};
  // The rename itself must reach the disk before we rely on it.
  std::string dir = std::filesystem::path(path).parent_path().string();
  if (dir.empty()) dir.assign(1, '.');
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
  const std::string_view first = text.substr(0, eol);
  if (eol != std::string_view::npos && first == kFirstLine)
    return decode_format5(text.substr(eol + 1), name, settings, limits, fdr);
  if (eol != std::string_view::npos && first == kFormat4Line)
    return decode_format4(text.substr(eol + 1), name, settings, limits, fdr);
  // An older or newer tallyd's checkpoint is named as such: the operator
  // decides whether to start fresh (--fresh) or run the version that wrote it.
  const bool other_version = first.substr(0, 18) == "tallyd-checkpoint ";
  return Error{fmt::format("{}: not a tallyd checkpoint of format version 4 or 5 (first line is '{}'); "
                           "refusing to load it{}",
                           name, first.substr(0, 60),
                           other_version ? " (it was written by another tallyd version, whose state this one "
                                           "cannot carry over)"
                                         : "")};
}

Result<std::optional<Restored>> read_file(const std::string& path, const SettingsTable& settings,
                                          EngineLimits limits, detect::FdrSpec fdr) {
  // In pieces of 1 MiB: a checkpoint can be hundreds of MiB, decoded once.
  return read_file_in_pieces(path, settings, limits, fdr, std::size_t{1} << 20);
}

}  // namespace tallyd::checkpoint
