// RecordParser: one parser for either feed format, chosen once per stream.
//
//   Result<RecordParser> p = RecordParser::csv(header_line, {"traps.csv", 1});
//   ParseOutcome o = p->parse(line, {"traps.csv", 2});
//
// The formats and their rules: feed/csv_parser.h and feed/jsonl_parser.h.
#pragma once

#include <cstdint>
#include <optional>
#include <string_view>
#include <variant>

#include "core/observation.h"
#include "core/result.h"
#include "feed/csv_parser.h"
#include "feed/feed_item.h"
#include "feed/jsonl_parser.h"
#include "feed/parse_outcome.h"

namespace tallyd {

enum class Format : std::uint8_t {
  csv,    // comma-separated values with a header line
  jsonl,  // JSON Lines: one JSON object per line
};

// "csv" or "jsonl".
std::string_view format_name(Format format);

// The format a file name announces: .jsonl, .ndjson or .json is jsonl, .csv
// is csv (letter case ignored); any other name announces nothing (nullopt)
// and the content decides, see format_of_first_line().
std::optional<Format> format_from_path(std::string_view path);

// For a stream whose name says nothing: jsonl when its first line that is not
// blank or a comment starts with '{' (after blanks), csv otherwise.
Format format_of_first_line(std::string_view line);

class RecordParser {
 public:
  // A CSV parser from the header line found at `header_pos`; fails as
  // CsvParser::from_header (the message names the source and line).
  static Result<RecordParser> csv(std::string_view header_line, const SourcePos& header_pos);
  static RecordParser jsonl();

  Format format() const { return impl_.index() == 0 ? Format::csv : Format::jsonl; }

  // One line without its line end; see CsvParser::parse and JsonlParser::parse.
  // Not thread-safe: reuses internal buffers between calls.
  ParseOutcome parse(std::string_view line, const SourcePos& where);

  // The same verdict written into `out`, as CsvParser::parse_into (for JSON
  // Lines the record is moved in whole).
  LineKind parse_into(std::string_view line, const SourcePos& where, FeedItem& out);

 private:
  explicit RecordParser(std::variant<CsvParser, JsonlParser> impl) : impl_(std::move(impl)) {}
  std::variant<CsvParser, JsonlParser> impl_;
};

}  // namespace tallyd
