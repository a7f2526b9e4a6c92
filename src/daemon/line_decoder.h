// LineDecoder: turns the lines of one live stream (a followed file, a TCP
// connection, standard input) into records and refusals, by the same rules as
// FeedFile (feed/feed_file.h): blank and '#' lines are skipped, a UTF-8 byte
// order mark on line 1 is ignored, the format comes from the configured one,
// else the file name, else the first line ('{' = JSON Lines, otherwise that
// line is the CSV header). No IO; not thread-safe; one per stream.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <string_view>

#include "core/observation.h"
#include "feed/line_splitter.h"
#include "feed/parse_outcome.h"
#include "feed/record_parser.h"

namespace tallyd::daemon {

class LineDecoder {
 public:
  // `format`: forced, or nullopt to settle it from the first line.
  LineDecoder(std::string source_name, std::optional<Format> format);

  // Resumes a stream whose format (and CSV header) were settled earlier, e.g.
  // from a checkpoint. Fails when the saved header is not a usable header.
  static Result<LineDecoder> resumed(std::string source_name, Format format, std::string_view header);

  // One split from a LineSplitter. A line that settles the format (a CSV
  // header) yields skip; a bad header yields a bad_format refusal and the
  // next line is tried as the header.
  ParseOutcome decode(const Split& split, std::size_t max_line_bytes);

  std::optional<Format> format() const { return parser_ ? std::optional<Format>(parser_->format()) : forced_; }
  const std::string& header() const { return header_; }  // the CSV header once settled
  bool settled() const { return parser_.has_value(); }

 private:
  // The source's name with the line number of the split being decoded: kept,
  // so that a long peer or file name is not copied for every line.
  SourcePos where_;
  std::optional<Format> forced_;
  std::optional<RecordParser> parser_;
  std::string header_;
};

}  // namespace tallyd::daemon
