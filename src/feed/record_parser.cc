#include "feed/record_parser.h"

#include "feed/field_check.h"

namespace tallyd {
namespace {

bool ends_with_ignoring_case(std::string_view text, std::string_view suffix) {
  if (text.size() < suffix.size()) return false;
  text.remove_prefix(text.size() - suffix.size());
  for (std::size_t i = 0; i < suffix.size(); ++i) {
    char c = text[i];
    if (c >= 'A' && c <= 'Z') c = static_cast<char>(c - 'A' + 'a');
    if (c != suffix[i]) return false;
  }
  return true;
}

}  // namespace

std::string_view format_name(Format format) { return format == Format::csv ? "csv" : "jsonl"; }

std::optional<Format> format_from_path(std::string_view path) {
  for (std::string_view ext : {".jsonl", ".ndjson", ".json"})
    if (ends_with_ignoring_case(path, ext)) return Format::jsonl;
  if (ends_with_ignoring_case(path, ".csv")) return Format::csv;
  return std::nullopt;
}

Format format_of_first_line(std::string_view line) {
  const std::string_view t = trim_blanks(line);
  return !t.empty() && t.front() == '{' ? Format::jsonl : Format::csv;
}

Result<RecordParser> RecordParser::csv(std::string_view header_line, const SourcePos& header_pos) {
  Result<CsvParser> parser = CsvParser::from_header(header_line, header_pos);
  if (!parser) return parser.error();
  return RecordParser(std::move(parser).value());
}

RecordParser RecordParser::jsonl() { return RecordParser(JsonlParser{}); }

ParseOutcome RecordParser::parse(std::string_view line, const SourcePos& where) {
  return std::visit([&](auto& parser) { return parser.parse(line, where); }, impl_);
}

LineKind RecordParser::parse_into(std::string_view line, const SourcePos& where, FeedItem& out) {
  if (CsvParser* csv = std::get_if<CsvParser>(&impl_)) return csv->parse_into(line, where, out);
  ParseOutcome outcome = std::get<JsonlParser>(impl_).parse(line, where);
  switch (outcome.kind()) {
    case LineKind::record: out.value = std::move(outcome.record()); break;
    case LineKind::rejected: out.value = std::move(outcome.rejection()); break;
    case LineKind::skip: break;
  }
  return outcome.kind();
}

}  // namespace tallyd
