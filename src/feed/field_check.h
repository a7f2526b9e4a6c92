// The rules for one field of a feed record, shared by the CSV and the JSON
// Lines parsers so that the same bad value gets the same refusal in both.
//
// Each read_* function takes the field's text (already unquoted / unescaped,
// trimmed by the caller where the format says so). On success it stores the
// value and returns an empty FieldCheck; on failure it leaves the output alone
// and returns the fault: a reason and a one-sentence detail that quotes the
// offending value with quote_value(). None of them allocates on success.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <string_view>

#include "core/reject.h"
#include "core/time.h"

namespace tallyd {

struct FieldFault {
  RejectReason reason;
  std::string detail;  // e.g. "count '-3' is negative"
};

// Empty when the field is good.
using FieldCheck = std::optional<FieldFault>;

// `text` in single quotes for a message: at most 40 bytes of it, then "...";
// bytes that are not printable ASCII or part of well-formed UTF-8 are written
// as \xNN, so junk cannot break a log line.
std::string quote_value(std::string_view text);

// `text` without spaces and tabs at either end.
std::string_view trim_blanks(std::string_view text);

// True for a line that is empty, only spaces/tabs, or whose first other
// character is '#': feeds may carry such lines anywhere; they are skipped.
bool is_blank_or_comment(std::string_view line);

// A series id must be non-empty and not only blanks (else bad_series), and be
// well-formed UTF-8 without control characters (else bad_format: it would be
// written to logs and alert files as is).
FieldCheck check_series(std::string_view text);

// RFC 3339 or integer epoch seconds, as core/time.h parse_time; bad_time.
FieldCheck read_time(std::string_view text, TimePoint& time);

// Epoch seconds given as a number (JSON): a whole value such as 1748757600 or
// 1748757600.0, within the range of int64 seconds; bad_time.
FieldCheck read_epoch_number(std::string_view number_text, TimePoint& time);

// A whole number >= 0: "17", also "17.0" or "1.7e1" (a whole value in
// decimal or exponent form, exact only below 2^53); bad_count when empty,
// negative, fractional, not a number, or beyond int64.
FieldCheck read_count(std::string_view text, std::int64_t& count);

// Effort: a finite number > 0. Empty text means the field is absent and gives
// the default, 1. Exactly zero (or -0) is zero_exposure; a non-zero value too
// small for a double, a negative, NaN, infinite or non-numeric value is
// bad_exposure.
FieldCheck read_exposure(std::string_view text, double& exposure);

// A covariate named `name`: a finite number; bad_covariate otherwise. (An
// empty CSV cell means the covariate is absent; the caller handles that.)
FieldCheck read_covariate(std::string_view name, std::string_view text, double& value);

}  // namespace tallyd
