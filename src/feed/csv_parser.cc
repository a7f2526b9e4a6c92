#include "feed/csv_parser.h"

#include <cstring>
#include <optional>

#include "feed/field_check.h"
#include "feed/utf8.h"

namespace tallyd {
namespace {

std::string position(const SourcePos& where) {
  std::string s = where.source;
  if (where.line > 0) {
    s += ':';
    s += std::to_string(where.line);
  }
  return s;
}

Rejection reject(RejectReason reason, const SourcePos& where, std::string detail) {
  return Rejection{reason, where, std::move(detail)};
}

Rejection reject(FieldFault fault, const SourcePos& where) {
  return Rejection{fault.reason, where, std::move(fault.detail)};
}

// to = from, without std::string::assign's general replace: the ids and the
// source name of consecutive records usually have the same length, and then
// this is one memcpy into the bytes `to` already owns.
void overwrite(std::string& to, std::string_view from) {
  if (to.size() != from.size()) {
    to.assign(from);
  } else if (!from.empty()) {
    std::memcpy(to.data(), from.data(), from.size());
  }
}

// Observation's members, for the guard in CsvParser::parse_into.
struct ObservationFields {
  TimePoint time;
  std::string series;
  std::int64_t count;
  double exposure;
  std::vector<Covariate> covariates;
  SourcePos where;
};

}  // namespace

Result<CsvParser> CsvParser::from_header(std::string_view header_line, const SourcePos& where) {
  auto fail = [&](const std::string& why) { return Error{position(where) + ": CSV header " + why}; };

  CsvParser parser;
  if (Status s = parser.fields_.split(header_line); !s)
    return fail("is broken: " + s.error().message);

  std::optional<std::size_t> time, series, count, exposure;
  std::vector<std::string_view> names;
  for (std::size_t i = 0; i < parser.fields_.size(); ++i) {
    const std::string_view name = trim_blanks(parser.fields_[i]);
    if (name.empty()) continue;  // unnamed: nothing can refer to it
    if (!is_valid_utf8(name))
      return fail("column " + std::to_string(i + 1) + " name " + quote_value(name) + " is not valid UTF-8");
    for (std::string_view seen : names)
      if (seen == name) return fail("names column " + quote_value(name) + " twice");
    names.push_back(name);
    if (name == "time") time = i;
    else if (name == "series") series = i;
    else if (name == "count") count = i;
    else if (name == "exposure") exposure = i;
    else parser.covariates_.push_back({i, std::string(name)});
  }

  std::string missing;
  for (auto [column, label] : {std::pair{time, "'time'"}, {series, "'series'"}, {count, "'count'"}}) {
    if (column) continue;
    if (!missing.empty()) missing += ", ";
    missing += label;
  }
  if (!missing.empty()) {
    std::string found;
    for (std::string_view n : names) found += (found.empty() ? "" : ", ") + quote_value(n);
    return fail("lacks column " + missing + " (it has " + (found.empty() ? "no named columns" : found) +
                "); time, series and count are required");
  }

  parser.column_count_ = parser.fields_.size();
  parser.time_ = *time;
  parser.series_ = *series;
  parser.count_ = *count;
  parser.exposure_ = exposure.value_or(kNoColumn);
  return parser;
}

std::vector<std::string> CsvParser::covariate_names() const {
  std::vector<std::string> names;
  for (const CovariateColumn& c : covariates_) names.push_back(c.name);
  return names;
}

ParseOutcome CsvParser::parse(std::string_view line, const SourcePos& where) {
  FeedItem item;
  switch (parse_into(line, where, item)) {
    case LineKind::record: return ParseOutcome::of(std::move(item.record()));
    case LineKind::rejected: return ParseOutcome::of(std::move(item.rejection()));
    case LineKind::skip: break;
  }
  return ParseOutcome::skip();
}

LineKind CsvParser::parse_into(std::string_view line, const SourcePos& where, FeedItem& out) {
  // A line that opens with anything but a blank or '#' needs no further look.
  const char first = line.empty() ? ' ' : line.front();
  if ((first == ' ' || first == '\t' || first == '#') && is_blank_or_comment(line)) return LineKind::skip;
  auto refuse = [&](Rejection rejection) {
    out.value = std::move(rejection);
    return LineKind::rejected;
  };
  if (!fields_.split_unquoted(line)) {
    if (Status s = fields_.split(line); !s)
      return refuse(reject(RejectReason::bad_format, where, "CSV " + s.error().message));
  }
  if (fields_.size() != column_count_)
    return refuse(reject(RejectReason::bad_format, where,
                         "line has " + std::to_string(fields_.size()) + " fields but the header has " +
                             std::to_string(column_count_) + ": " + quote_value(line)));

  // The record is written over the one `out` already holds, if any, so its
  // strings and covariate list keep their capacity: a FeedItem reused from
  // line to line costs no allocation per line. Every field is assigned below;
  // this guard fails to compile when Observation gains one that is not.
  static_assert(sizeof(Observation) == sizeof(ObservationFields), "CsvParser::parse_into must set every field");
  if (!out.is_record()) out.value.emplace<Observation>();
  Observation& obs = out.record();

  if (const std::string_view time_text = fields_[time_]; time_text == last_time_text_ && !time_text.empty()) {
    obs.time = last_time_;
  } else {
    if (FieldCheck f = read_time(time_text, obs.time)) return refuse(reject(std::move(*f), where));
    last_time_text_.assign(time_text);
    last_time_ = obs.time;
  }
  const std::string_view series = fields_[series_];
  if (FieldCheck f = check_series(series)) return refuse(reject(std::move(*f), where));
  if (FieldCheck f = read_count(fields_[count_], obs.count)) return refuse(reject(std::move(*f), where));
  obs.exposure = 1.0;
  if (exposure_ != kNoColumn)
    if (FieldCheck f = read_exposure(fields_[exposure_], obs.exposure)) return refuse(reject(std::move(*f), where));

  std::size_t carried = 0;
  for (const CovariateColumn& column : covariates_) {
    const std::string_view cell = fields_[column.index];
    if (cell.empty()) continue;  // this record does not carry the covariate
    double value = 0;
    if (FieldCheck f = read_covariate(column.name, cell, value)) return refuse(reject(std::move(*f), where));
    if (carried < obs.covariates.size()) {
      Covariate& c = obs.covariates[carried];
      overwrite(c.name, column.name);
      c.value = value;
    } else {
      obs.covariates.push_back(Covariate{column.name, value});
    }
    ++carried;
  }
  obs.covariates.resize(carried);
  overwrite(obs.series, series);
  overwrite(obs.where.source, where.source);
  obs.where.line = where.line;
  return LineKind::record;
}

}  // namespace tallyd
