// FeedFile: reads one feed (a file, or any ByteSource) from start to end and
// hands out its records and refusals in line order.
//
//   Result<FeedFile> feed = FeedFile::open("traps.csv", ReadOptions{});
//   if (!feed) { report(feed.error().message); return; }
//   FeedItem item;
//   while (feed->next(item)) item.is_record() ? use(item.record()) : count(item.rejection());
//
// Format: by file name (feed/record_parser.h format_from_path), else by the
// first line that is not blank or a comment ('{' means JSON Lines). For CSV
// that line is the header. A UTF-8 byte order mark at the very start of the
// input is ignored. A line longer than max_line_bytes is refused as
// line_too_long, unless it starts with '#': a comment of any length is skipped.
//
// Reading is streamed: chunk_bytes at a time, never the whole file; memory
// stays near max_line_bytes + chunk_bytes whatever the file size.
//
// Not thread-safe; movable, not copyable.
#pragma once

#include <cstddef>
#include <cstdint>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "core/result.h"
#include "feed/byte_source.h"
#include "feed/feed_item.h"
#include "feed/line_splitter.h"
#include "feed/record_parser.h"

namespace tallyd {

// How feeds are read. Both fields must be at least 1.
struct ReadOptions {
  // Longest line accepted, in bytes, not counting its "\n" / "\r\n". A longer
  // line is refused as line_too_long and skipped without being buffered.
  std::size_t max_line_bytes = 64 * 1024;
  // Bytes asked of the source per read; also the size of the read buffer.
  std::size_t chunk_bytes = 64 * 1024;
};

class FeedFile {
 public:
  // Opens the file at `path` and reads up to its first line that is not blank
  // or a comment, to settle the format and, for CSV, read the header.
  // Fails, with a message naming the path (and line), when the file cannot be
  // opened or read that far ("cannot open 'x.csv': No such file or directory"), when the CSV header is unusable (see
  // CsvParser::from_header; also when it is longer than max_line_bytes), or
  // when an option is 0. An empty file (or one with only blank and comment
  // lines) is not an error: it yields nothing.
  static Result<FeedFile> open(const std::string& path, const ReadOptions& options);

  // The same for bytes from `source`; `name` stands for it in messages and
  // positions. `format` nullopt: decide from the first line.
  static Result<FeedFile> read_from(std::unique_ptr<ByteSource> source, std::string name,
                                    std::optional<Format> format, const ReadOptions& options);

  // The next record or refusal, in line order; false at the end (and on every
  // call after). Blank and comment lines yield nothing. If the source fails
  // mid-way, the lines complete before the failure are still handed out,
  // then one read_error refusal at the line where reading stopped, then the
  // end. Never throws on data.
  bool next(FeedItem& out);

  const std::string& name() const { return where_.source; }
  // nullopt only for an input with no line to tell the format by.
  std::optional<Format> format() const { return format_; }

 private:
  FeedFile(std::unique_ptr<ByteSource> source, std::string name, const ReadOptions& options);

  // A line taken from the splitter before a parser existed (JSON Lines
  // settled by its first line), handed out first by next().
  struct HeldLine {
    SplitKind kind;
    std::string text;
    std::uint64_t number;
  };

  Split pull();
  Status settle_format();
  bool emit(const Split& split, FeedItem& out);

  std::unique_ptr<ByteSource> source_;
  SourcePos where_;  // source name, and the line being handed out
  ReadOptions options_;
  LineSplitter splitter_;
  std::vector<char> chunk_;
  std::optional<Format> format_;
  std::optional<RecordParser> parser_;
  std::optional<HeldLine> held_;
  bool at_end_ = false;                      // the source has no more bytes
  std::optional<std::string> read_failure_;  // why the source failed, until reported
  std::uint64_t failed_at_line_ = 0;
  bool done_ = false;                        // everything has been handed out
};

}  // namespace tallyd
