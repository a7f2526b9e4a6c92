#include "daemon/line_decoder.h"

#include <fmt/format.h>

#include "feed/field_check.h"

namespace tallyd::daemon {

LineDecoder::LineDecoder(std::string source_name, std::optional<Format> format)
    : where_{std::move(source_name), 0}, forced_(format) {
  if (forced_ == Format::jsonl) parser_ = RecordParser::jsonl();
}

Result<LineDecoder> LineDecoder::resumed(std::string source_name, Format format, std::string_view header) {
  LineDecoder d(std::move(source_name), format);
  if (format == Format::csv) {
    Result<RecordParser> p = RecordParser::csv(header, SourcePos{d.where_.source, 0});
    if (!p) return p.error();
    d.parser_ = std::move(p).value();
    d.header_ = std::string(header);
  }
  return d;
}

ParseOutcome LineDecoder::decode(const Split& split, std::size_t max_line_bytes) {
  std::string_view text = split.text;
  if (split.number == 1 && text.substr(0, 3) == "\xEF\xBB\xBF") text.remove_prefix(3);
  where_.line = split.number;
  const SourcePos& where = where_;
  if (split.kind == SplitKind::too_long) {
    const std::string_view t = trim_blanks(text);
    if (!t.empty() && t.front() == '#') return ParseOutcome::skip();
    return ParseOutcome::of(Rejection{RejectReason::line_too_long, where,
                                      fmt::format("line is longer than {} bytes and was skipped; it starts {}",
                                                  max_line_bytes, quote_value(text.substr(0, 40)))});
  }
  if (is_blank_or_comment(text)) return ParseOutcome::skip();
  if (!parser_) {
    const Format f = forced_.value_or(format_of_first_line(text));
    if (f == Format::jsonl) {
      parser_ = RecordParser::jsonl();
    } else {
      Result<RecordParser> p = RecordParser::csv(text, where);
      if (!p) return ParseOutcome::of(Rejection{RejectReason::bad_format, where, p.error().message});
      parser_ = std::move(p).value();
      header_ = std::string(text);
      return ParseOutcome::skip();
    }
  }
  return parser_->parse(text, where);
}

}  // namespace tallyd::daemon
