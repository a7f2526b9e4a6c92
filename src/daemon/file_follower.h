// FileFollower: reads one file as it grows, like `tail -F`, and decodes its
// complete lines into a LineBatch for the judging thread. Driven by poll()
// from a timer; plain POSIX reads, no Asio, so tests can drive it directly.
//
// - Only complete lines ('\n'-terminated) are taken: a writer may be in the
//   middle of the last one.
// - Rotation by rename (another file now at the path): the old file is read
//   to its end, then the new one is read from its start.
// - Truncation (the file is shorter than what was read): read from the start.
// - A missing file is looked for again at each poll.
// - mark() is where reading stands: the byte after the last line handed out,
//   with the file's identity; poll() puts it into its batch, and once the
//   batch is judged it is what a checkpoint records. resume_from() starts
//   there after a restart when the file at the path is still the same one.
// Not thread-safe: the event-loop thread only. `figures` is only pointed to
// (LineBatch::figures), never written here.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "checkpoint/checkpoint.h"
#include "daemon/intake.h"
#include "daemon/line_batch.h"
#include "daemon/line_decoder.h"
#include "feed/line_splitter.h"

namespace tallyd::daemon {

class FileFollower {
 public:
  FileFollower(std::string path, std::size_t max_line_bytes, SourceFigures& figures);
  ~FileFollower();
  FileFollower(const FileFollower&) = delete;
  FileFollower& operator=(const FileFollower&) = delete;

  // Use a checkpoint's mark at the next open: if the file at the path has the
  // same device and inode and is at least mark.offset bytes long, reading
  // resumes there; otherwise it starts from the beginning (logged).
  void resume_from(const checkpoint::FileMark& mark);

  // Reads what is new, up to `budget_bytes`, and appends its decoded lines to
  // `batch` (batch.figures and batch.arrival are set too). batch.mark is set
  // to mark() when lines were added or the mark moved since the last poll
  // (a rotation, a truncation, a first open); otherwise it is left as it was.
  // Returns true when it stopped because of the budget (more is waiting).
  bool poll(LineBatch& batch, std::size_t budget_bytes);

  checkpoint::FileMark mark() const;
  const std::string& path() const { return path_; }
  bool is_open() const { return fd_ >= 0; }
  std::uint64_t consumed() const;        // bytes of the current file handed out
  std::uint64_t size_seen() const { return size_seen_; }  // size at the last poll

 private:
  bool open_file();
  void close_file();
  void start_stream(std::uint64_t offset, std::uint64_t line, const checkpoint::FileMark* resumed);
  bool read_some(LineBatch& batch, std::size_t budget_bytes);  // poll() without the mark
  void take_lines(LineBatch& batch);
  void finish_batch(LineBatch& batch);

  std::string path_;
  std::size_t max_line_bytes_;
  SourceFigures* figures_;
  int fd_ = -1;
  std::uint64_t device_ = 0, inode_ = 0;
  std::uint64_t read_pos_ = 0;   // bytes of the file pushed into the splitter
  std::uint64_t base_line_ = 0;  // lines before read start (resumed files)
  std::uint64_t size_seen_ = 0;
  LineSplitter splitter_;
  std::optional<LineDecoder> decoder_;
  std::optional<checkpoint::FileMark> pending_resume_;
  std::optional<checkpoint::FileMark> last_handed_;  // the mark of the last batch poll() filled
  std::vector<char> chunk_;
};

}  // namespace tallyd::daemon
