#include "checkpoint/piecewise_read.h"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <cstring>
#include <memory>

#include <fmt/format.h>
#include <xxhash.h>

#include "checkpoint/format5.h"
#include "checkpoint/parts.h"
#include "core/state_codec.h"

namespace tallyd::checkpoint {
namespace {

// read(2) on an open file, retrying on EINTR; keeps the first error (after
// which it reads nothing more).
class FileBytes {
 public:
  explicit FileBytes(int fd) : fd_(fd) {}
  FileBytes(const FileBytes&) = delete;
  FileBytes& operator=(const FileBytes&) = delete;
  ~FileBytes() { ::close(fd_); }

  std::size_t read(char* into, std::size_t max) {
    while (error_ == 0 && max > 0) {
      const ssize_t n = ::read(fd_, into, max);
      if (n >= 0) return static_cast<std::size_t>(n);
      if (errno != EINTR) error_ = errno;
    }
    return 0;
  }
  int error() const { return error_; }

 private:
  int fd_;
  int error_ = 0;
};

// The body section for a streaming reader: first the bytes read along with
// the front of the file, then the file's, `size` bytes in all, each hashed
// as it is handed out.
class BodySource final : public StateSource {
 public:
  BodySource(std::string_view already, FileBytes& file, std::size_t size)
      : already_(already), file_(file), left_(size), hash_(XXH3_createState(), &XXH3_freeState) {
    if (hash_) XXH3_64bits_reset(hash_.get());
  }

  std::size_t read(char* into, std::size_t max) override {
    max = std::min(max, left_);
    std::size_t got = 0;
    if (!already_.empty()) {
      got = std::min(max, already_.size());
      std::memcpy(into, already_.data(), got);
      already_.remove_prefix(got);
    } else {
      got = file_.read(into, max);
    }
    if (hash_) XXH3_64bits_update(hash_.get(), into, got);
    left_ -= got;
    return got;
  }

  // Reads and hashes what the decoder left of the body; the checksum of
  // the whole body, or nullopt when the file ended (or failed) first.
  std::optional<std::uint64_t> finish() {
    char scrap[1 << 16];
    while (left_ > 0)
      if (read(scrap, sizeof scrap) == 0) return std::nullopt;
    if (!hash_) return std::nullopt;
    return XXH3_64bits_digest(hash_.get());
  }

  // What follows the body: the rest of the front, then the file to its end
  // (at most `max` bytes).
  std::string tail(std::size_t max) {
    std::string out(already_.substr(0, max));
    while (out.size() < max) {
      char more[64];
      const std::size_t got = file_.read(more, std::min(sizeof more, max - out.size()));
      if (got == 0) break;
      out.append(more, got);
    }
    return out;
  }

 private:
  std::string_view already_;
  FileBytes& file_;
  std::size_t left_;
  std::unique_ptr<XXH3_state_t, XXH_errorcode (*)(XXH3_state_t*)> hash_;
};

Error read_error(const std::string& path, int error) {
  return Error{fmt::format("{}: cannot read checkpoint: {}", path, std::strerror(error))};
}

}  // namespace

Result<std::optional<Restored>> read_file_in_pieces(const std::string& path, const SettingsTable& settings,
                                                    EngineLimits limits, detect::FdrSpec fdr, std::size_t piece) {
  piece = std::max<std::size_t>(piece, 1);
  const int fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) {
    if (errno == ENOENT) return std::optional<Restored>{};
    return read_error(path, errno);
  }
  FileBytes file(fd);
  struct stat st {};
  if (::fstat(fd, &st) != 0) return read_error(path, errno);
  const auto file_size = static_cast<std::uint64_t>(st.st_size);

  // The front of the file (first line, head line, head, body line) and
  // whatever of the body came with it.
  std::string front;
  const auto more = [&] {
    const std::size_t had = front.size();
    front.resize(had + piece);
    const std::size_t got = file.read(front.data() + had, piece);
    front.resize(had + got);
    return got > 0;
  };
  // The rest of the file after the front, and decode() of it all: every
  // file that is not a sound format-5 front gets decode's verdict and words.
  const auto whole = [&]() -> Result<std::optional<Restored>> {
    while (more()) {
    }
    if (file.error() != 0) return read_error(path, file.error());
    auto r = decode(front, path, settings, limits, fdr);
    if (!r) return r.error();
    return std::optional<Restored>{std::move(r).value()};
  };
  // The end of the line starting at `from`; npos when the file has none
  // within a line's plausible length (section lines are short).
  const auto line_end = [&](std::size_t from) {
    for (;;) {
      const std::size_t eol = front.find('\n', from);
      if (eol != std::string::npos || front.size() > from + 4096 || !more()) return eol;
    }
  };

  const std::size_t first_end = line_end(0);
  if (first_end == std::string::npos || std::string_view(front).substr(0, first_end) != kFirstLine) return whole();
  const std::size_t head_line_end = line_end(first_end + 1);
  if (head_line_end == std::string::npos) return whole();
  auto head_line =
      parse_section_line(std::string_view(front).substr(first_end + 1, head_line_end - first_end - 1), "head", path);
  if (!head_line || head_line->bytes > file_size) return whole();
  const std::size_t head_start = head_line_end + 1;
  const std::size_t head_end = head_start + static_cast<std::size_t>(head_line->bytes);
  while (front.size() < head_end && more()) {
  }
  if (front.size() < head_end) return whole();
  if (section_checksum(std::string_view(front).substr(head_start, head_end - head_start)) != head_line->checksum)
    return whole();
  const std::size_t body_line_end = line_end(head_end);
  if (body_line_end == std::string::npos) return whole();
  auto body_line =
      parse_section_line(std::string_view(front).substr(head_end, body_line_end - head_end), "body", path);
  const std::uint64_t body_start = body_line_end + 1;
  if (!body_line || body_line->bytes > file_size || body_start + body_line->bytes + kEndLine.size() != file_size)
    return whole();

  // The front is sound: decode the body as it is read. Errors come in
  // decode's order: the body's checksum, the end line, then the content.
  const auto head = read_head(std::string_view(front).substr(head_start, head_end - head_start), path);
  const auto body_size = static_cast<std::size_t>(body_line->bytes);
  BodySource source(std::string_view(front).substr(body_start), file, body_size);
  std::optional<Result<Restored>> restored;
  if (head) {
    StateReader body(source, body_size, piece);
    restored = restore_body(body, body_size, *head, path, settings, limits, fdr);
  }
  const std::optional<std::uint64_t> sum = source.finish();
  if (file.error() != 0) return read_error(path, file.error());
  if (!sum)
    return Error{fmt::format("{}: checkpoint is truncated (the file got shorter while it was read); "
                             "refusing to load it",
                             path)};
  if (*sum != body_line->checksum) return checksum_mismatch("body", path);
  if (Status end = check_end(source.tail(kEndLine.size() + 1), path); !end) return end.error();
  if (!head) return head.error();
  if (!*restored) return restored->error();
  return std::optional<Restored>{std::move(*restored).value()};
}

}  // namespace tallyd::checkpoint
