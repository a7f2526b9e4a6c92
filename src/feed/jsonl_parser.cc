#include "feed/jsonl_parser.h"

#include <optional>
#include <string>

#include "feed/field_check.h"

namespace tallyd {
namespace {

std::string_view type_name(JsonType type) {
  switch (type) {
    case JsonType::string: return "a string";
    case JsonType::number: return "a number";
    case JsonType::boolean: return "true/false";
    case JsonType::null: return "null";
    case JsonType::object: return "an object";
    case JsonType::array: return "an array";
  }
  return "a value";
}

FieldFault wrong_type(RejectReason reason, std::string_view field, std::string_view want, const JsonMember& m) {
  std::string detail(field);
  if (m.type == JsonType::string) {
    detail += ' ';
    detail += quote_value(m.text);
  }
  detail += " is ";
  detail += type_name(m.type);
  detail += ", not ";
  detail += want;
  return FieldFault{reason, std::move(detail)};
}

struct Seen {
  bool time = false;
  bool series = false;
  bool count = false;
  bool exposure = false;
};

// Reads one member into `obs`. Returns a fault for a bad value; sets
// `duplicate` when the member repeats one already read.
FieldCheck read_member(const JsonMember& m, Observation& obs, Seen& seen, bool& duplicate) {
  auto first_time = [&](bool& flag) {
    duplicate = flag;
    flag = true;
    return !duplicate;
  };
  if (m.key == "time") {
    if (!first_time(seen.time)) return std::nullopt;
    if (m.type == JsonType::string) return read_time(m.text, obs.time);
    if (m.type == JsonType::number) return read_epoch_number(m.text, obs.time);
    return wrong_type(RejectReason::bad_time, "time", "a string or a number", m);
  }
  if (m.key == "series") {
    if (!first_time(seen.series)) return std::nullopt;
    if (m.type == JsonType::string) {
      if (FieldCheck f = check_series(m.text)) return f;
    } else if (m.type != JsonType::number || !m.integer_syntax) {
      return wrong_type(RejectReason::bad_series, "series", "a string", m);
    }
    obs.series.assign(m.text);
    return std::nullopt;
  }
  if (m.key == "count") {
    if (!first_time(seen.count)) return std::nullopt;
    if (m.type == JsonType::number) return read_count(m.text, obs.count);
    return wrong_type(RejectReason::bad_count, "count", "a number", m);
  }
  if (m.key == "exposure") {
    if (!first_time(seen.exposure)) return std::nullopt;
    if (m.type == JsonType::number) return read_exposure(m.text, obs.exposure);
    if (m.type == JsonType::null)  // present but unknown, unlike an absent key (default 1)
      return FieldCheck(FieldFault{RejectReason::missing_exposure, "exposure is null: the effort behind this count is unknown"});
    return wrong_type(RejectReason::bad_exposure, "exposure", "a number", m);
  }
  if (m.type != JsonType::number) return std::nullopt;  // not a covariate: ignored
  if (obs.covariate(m.key) != nullptr) {
    duplicate = true;
    return std::nullopt;
  }
  double value = 0;
  if (FieldCheck f = read_covariate(m.key, m.text, value)) return f;
  obs.covariates.push_back(Covariate{std::string(m.key), value});
  return std::nullopt;
}

std::string broken_detail(const JsonObjectReader& reader, std::string_view line) {
  if (reader.not_an_object()) return "line is not a JSON object: " + quote_value(line);
  const std::size_t at = reader.problem_offset();
  std::string detail = "broken JSON: ";
  detail += reader.problem();
  if (at >= line.size()) return detail + " at the end of the line";
  return detail + " at byte " + std::to_string(at + 1) + ", near " + quote_value(line.substr(at));
}

}  // namespace

ParseOutcome JsonlParser::parse(std::string_view line, const SourcePos& where) {
  if (is_blank_or_comment(line)) return ParseOutcome::skip();
  reader_.start(line);

  Observation obs;
  Seen seen;
  FieldCheck first_fault;
  std::string duplicate_key;
  JsonMember m;
  JsonStep step;
  // Read to the end even after a bad value: a line that is not well-formed
  // JSON is bad_format whatever its values.
  while ((step = reader_.next(m)) == JsonStep::member) {
    if (first_fault || !duplicate_key.empty()) continue;
    bool duplicate = false;
    first_fault = read_member(m, obs, seen, duplicate);
    if (duplicate) duplicate_key.assign(m.key);
  }
  if (step == JsonStep::broken)
    return ParseOutcome::of(Rejection{RejectReason::bad_format, where, broken_detail(reader_, line)});
  if (!duplicate_key.empty())
    return ParseOutcome::of(
        Rejection{RejectReason::bad_format, where, "member " + quote_value(duplicate_key) + " appears twice"});
  if (first_fault) return ParseOutcome::of(Rejection{first_fault->reason, where, std::move(first_fault->detail)});
  if (!seen.time) return ParseOutcome::of(Rejection{RejectReason::bad_time, where, "time is missing"});
  if (!seen.series) return ParseOutcome::of(Rejection{RejectReason::bad_series, where, "series is missing"});
  if (!seen.count) return ParseOutcome::of(Rejection{RejectReason::bad_count, where, "count is missing"});
  obs.where = where;
  return ParseOutcome::of(std::move(obs));
}

}  // namespace tallyd
