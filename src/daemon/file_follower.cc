#include "daemon/file_follower.h"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>

#include <spdlog/spdlog.h>

namespace tallyd::daemon {

FileFollower::FileFollower(std::string path, std::size_t max_line_bytes, SourceFigures& figures)
    : path_(std::move(path)), max_line_bytes_(max_line_bytes), figures_(&figures), splitter_(max_line_bytes),
      chunk_(64 * 1024) {}

FileFollower::~FileFollower() { close_file(); }

void FileFollower::close_file() {
  if (fd_ >= 0) ::close(fd_);
  fd_ = -1;
}

void FileFollower::resume_from(const checkpoint::FileMark& mark) { pending_resume_ = mark; }

std::uint64_t FileFollower::consumed() const { return read_pos_ - splitter_.buffered_bytes(); }

checkpoint::FileMark FileFollower::mark() const {
  checkpoint::FileMark m;
  m.path = path_;
  if (fd_ < 0) return m;  // nothing open: a restart starts this path from the beginning
  m.device = device_;
  m.inode = inode_;
  m.offset = consumed();
  m.line = splitter_.line_number() - 1 + base_line_;
  if (decoder_ && decoder_->settled()) {
    m.format = decoder_->format() == Format::csv ? 0 : 1;
    m.header = decoder_->header();
  }
  return m;
}

void FileFollower::start_stream(std::uint64_t offset, std::uint64_t line, const checkpoint::FileMark* resumed) {
  read_pos_ = offset;
  base_line_ = line;
  splitter_ = LineSplitter(max_line_bytes_);
  decoder_.emplace(path_, format_from_path(path_));
  if (resumed && resumed->format >= 0) {
    auto d = LineDecoder::resumed(path_, resumed->format == 0 ? Format::csv : Format::jsonl, resumed->header);
    if (d) decoder_.emplace(std::move(d).value());
  }
}

bool FileFollower::open_file() {
  int fd = ::open(path_.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) return false;
  struct stat st {};
  if (::fstat(fd, &st) != 0 || !S_ISREG(st.st_mode)) {
    ::close(fd);
    return false;
  }
  fd_ = fd;
  device_ = static_cast<std::uint64_t>(st.st_dev);
  inode_ = static_cast<std::uint64_t>(st.st_ino);
  size_seen_ = static_cast<std::uint64_t>(st.st_size);
  if (pending_resume_) {
    const checkpoint::FileMark m = *pending_resume_;
    pending_resume_.reset();
    if (m.device == device_ && m.inode == inode_ && m.offset <= size_seen_) {
      start_stream(m.offset, m.line, &m);
      if (::lseek(fd_, static_cast<off_t>(m.offset), SEEK_SET) < 0) start_stream(0, 0, nullptr);
      spdlog::info("{}: resuming at byte {} (line {})", path_, m.offset, m.line + 1);
      return true;
    }
    if (m.inode != 0)
      spdlog::warn("{}: not the file the checkpoint read (replaced or shortened while stopped); reading it from the start",
                   path_);
  }
  start_stream(0, 0, nullptr);
  spdlog::info("{}: following from the start", path_);
  return true;
}

void FileFollower::take_lines(LineBatch& batch) {
  for (Split s = splitter_.next(); s.kind != SplitKind::need_more; s = splitter_.next()) {
    s.number += base_line_;
    batch.lines.push_back(decoder_->decode(s, max_line_bytes_));
  }
}

namespace {

bool same_mark(const checkpoint::FileMark& a, const checkpoint::FileMark& b) {
  return a.path == b.path && a.device == b.device && a.inode == b.inode && a.offset == b.offset &&
         a.line == b.line && a.format == b.format && a.header == b.header;
}

}  // namespace

void FileFollower::finish_batch(LineBatch& batch) {
  checkpoint::FileMark now = mark();
  if (batch.lines.empty() && last_handed_ && same_mark(now, *last_handed_)) return;
  last_handed_ = now;
  batch.mark = std::move(now);
}

bool FileFollower::poll(LineBatch& batch, std::size_t budget_bytes) {
  batch.figures = figures_;
  const bool more = read_some(batch, budget_bytes);
  // Whatever happened (lines, rotation, truncation, a failed read), the batch
  // leaves with the mark of where reading now stands.
  finish_batch(batch);
  return more;
}

bool FileFollower::read_some(LineBatch& batch, std::size_t budget_bytes) {
  if (fd_ < 0 && !open_file()) return false;
  std::size_t taken = 0;
  while (taken < budget_bytes) {
    ssize_t n = ::read(fd_, chunk_.data(), chunk_.size());
    if (n < 0) {
      if (errno == EINTR) continue;
      spdlog::error("{}: read failed: {}; reopening at the next poll", path_, std::strerror(errno));
      close_file();
      return false;
    }
    if (n == 0) break;
    if (taken == 0) batch.arrival = std::chrono::steady_clock::now();
    read_pos_ += static_cast<std::uint64_t>(n);
    taken += static_cast<std::size_t>(n);
    splitter_.push(std::string_view(chunk_.data(), static_cast<std::size_t>(n)));
    take_lines(batch);
  }
  if (taken >= budget_bytes) return true;

  // At the end of the open file: has it been replaced or cut?
  struct stat now {}, open_st {};
  const bool fstat_ok = ::fstat(fd_, &open_st) == 0;
  if (fstat_ok) size_seen_ = static_cast<std::uint64_t>(open_st.st_size);
  if (fstat_ok && static_cast<std::uint64_t>(open_st.st_size) < read_pos_) {
    spdlog::warn("{}: truncated (now {} bytes, {} were read); reading from the start", path_, open_st.st_size,
                 read_pos_);
    ::lseek(fd_, 0, SEEK_SET);
    start_stream(0, 0, nullptr);
    return true;
  }
  if (::stat(path_.c_str(), &now) == 0 &&
      (static_cast<std::uint64_t>(now.st_ino) != inode_ || static_cast<std::uint64_t>(now.st_dev) != device_)) {
    // Rotated: the old file has been read to its end above (a last line
    // without '\n' in it is left unread: it was never completed).
    spdlog::info("{}: rotated; following the new file from its start", path_);
    close_file();
    return true;
  }
  return false;
}

}  // namespace tallyd::daemon
