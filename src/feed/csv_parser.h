// CsvParser: turns lines of a CSV feed into observations, using the column
// layout read from the feed's header line.
//
// Columns (names are case-sensitive and trimmed of spaces; order is free):
//   time      RFC 3339 (2025-06-01T06:00:00Z) or integer epoch seconds; required
//   series    the series id; quote it ("trap 4, north") if it holds a comma; required
//   count     whole number >= 0 (17 or 17.0); required
//   exposure  effort, a number > 0; optional: absent column or empty cell = 1
//   any other named column is a numeric covariate of that name; an empty
//   cell means the record does not carry it. Unnamed columns are ignored.
// Field rules and the refusals they give are those of feed/field_check.h;
// splitting and quoting, feed/csv_fields.h. Lines that are blank or start
// with '#' are skipped, so a first-column series id starting with '#' must be
// quoted ("#7",...).
#pragma once

#include <cstddef>
#include <string>
#include <string_view>
#include <vector>

#include "core/observation.h"
#include "core/result.h"
#include "core/time.h"
#include "feed/csv_fields.h"
#include "feed/feed_item.h"
#include "feed/parse_outcome.h"

namespace tallyd {

class CsvParser {
 public:
  // Reads the header line found at `where`. Fails, with a message starting
  // "<source>:<line>: ", when a column name is not valid UTF-8 or appears
  // twice, when quoting is broken, or when time, series or count is missing.
  static Result<CsvParser> from_header(std::string_view header_line, const SourcePos& where);

  // One data line (without its line end) found at `where`: a record, a
  // rejection (bad_format for broken quoting or a field count unlike the
  // header's; otherwise the first failing field in the order time, series,
  // count, exposure, covariates), or skip. Never throws on data.
  // Not thread-safe: reuses internal buffers between calls.
  ParseOutcome parse(std::string_view line, const SourcePos& where);

  // The same verdict as parse(), written into `out`: a record or a rejection
  // replaces what `out` held; on skip `out` is left alone. When `out` already
  // holds a record, that record's fields are overwritten in place, so a
  // FeedItem reused from line to line keeps its strings' capacity and a line
  // costs no allocation once they have grown to the longest series id,
  // source name and covariate names seen.
  LineKind parse_into(std::string_view line, const SourcePos& where, FeedItem& out);

  std::size_t column_count() const { return column_count_; }
  // Names of the covariate columns, in header order.
  std::vector<std::string> covariate_names() const;

 private:
  struct CovariateColumn {
    std::size_t index;
    std::string name;
  };

  CsvParser() = default;

  std::size_t column_count_ = 0;
  std::size_t time_ = 0;
  std::size_t series_ = 0;
  std::size_t count_ = 0;
  std::size_t exposure_ = kNoColumn;
  std::vector<CovariateColumn> covariates_;
  CsvFields fields_;
  // The last time text that parsed, and its value: the lines of one check
  // (every trap at the same time) share it, so most lines skip the parse.
  std::string last_time_text_;
  TimePoint last_time_{};

  static constexpr std::size_t kNoColumn = static_cast<std::size_t>(-1);
};

}  // namespace tallyd
