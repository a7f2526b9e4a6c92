#include "core/reject.h"

namespace tallyd {

std::string_view reject_label(RejectReason reason) {
  switch (reason) {
    case RejectReason::bad_time: return "bad_time";
    case RejectReason::bad_series: return "bad_series";
    case RejectReason::bad_count: return "bad_count";
    case RejectReason::bad_exposure: return "bad_exposure";
    case RejectReason::zero_exposure: return "zero_exposure";
    case RejectReason::bad_covariate: return "bad_covariate";
    case RejectReason::missing_covariate: return "missing_covariate";
    case RejectReason::line_too_long: return "line_too_long";
    case RejectReason::bad_format: return "bad_format";
    case RejectReason::out_of_order: return "out_of_order";
    case RejectReason::too_many_series: return "too_many_series";
    case RejectReason::read_error: return "read_error";
    case RejectReason::missing_exposure: return "missing_exposure";
    case RejectReason::too_late: return "too_late";
    case RejectReason::duplicate_time: return "duplicate_time";
  }
  return "unknown";
}

std::string Rejection::describe() const {
  std::string s = where.source;
  if (where.line > 0) {
    s += ':';
    s += std::to_string(where.line);
  }
  if (!s.empty()) s += ": ";
  s += reject_label(reason);
  s += ": ";
  s += detail;
  return s;
}

}  // namespace tallyd
