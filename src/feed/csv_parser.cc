#include "feed/csv_parser.h"

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
  if (is_blank_or_comment(line)) return ParseOutcome::skip();
  if (Status s = fields_.split(line); !s)
    return ParseOutcome::of(reject(RejectReason::bad_format, where, "CSV " + s.error().message));
  if (fields_.size() != column_count_)
    return ParseOutcome::of(reject(RejectReason::bad_format, where,
                                   "line has " + std::to_string(fields_.size()) + " fields but the header has " +
                                       std::to_string(column_count_) + ": " + quote_value(line)));

  Observation obs;
  if (const std::string_view time_text = fields_[time_]; time_text == last_time_text_ && !time_text.empty()) {
    obs.time = last_time_;
  } else {
    if (FieldCheck f = read_time(time_text, obs.time)) return ParseOutcome::of(reject(std::move(*f), where));
    last_time_text_.assign(time_text);
    last_time_ = obs.time;
  }
  if (FieldCheck f = check_series(fields_[series_])) return ParseOutcome::of(reject(std::move(*f), where));
  if (FieldCheck f = read_count(fields_[count_], obs.count)) return ParseOutcome::of(reject(std::move(*f), where));
  if (exposure_ != kNoColumn)
    if (FieldCheck f = read_exposure(fields_[exposure_], obs.exposure))
      return ParseOutcome::of(reject(std::move(*f), where));

  std::size_t present = 0;
  for (const CovariateColumn& column : covariates_) present += fields_[column.index].empty() ? 0 : 1;
  if (present > 0) obs.covariates.reserve(present);  // one allocation, and none without covariates
  for (const CovariateColumn& column : covariates_) {
    const std::string_view cell = fields_[column.index];
    if (cell.empty()) continue;  // this record does not carry the covariate
    double value = 0;
    if (FieldCheck f = read_covariate(column.name, cell, value))
      return ParseOutcome::of(reject(std::move(*f), where));
    obs.covariates.push_back(Covariate{column.name, value});
  }
  obs.series.assign(fields_[series_]);
  obs.where = where;
  return ParseOutcome::of(std::move(obs));
}

}  // namespace tallyd
