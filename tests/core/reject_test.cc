#include "core/reject.h"

#include <catch2/catch.hpp>

#include <set>
#include <string>

namespace tallyd {
namespace {

TEST_CASE("every refusal reason has its own snake_case label", "[core][reject]") {
  std::set<std::string_view> labels;
  for (std::size_t i = 0; i < kRejectReasonCount; ++i) {
    const std::string_view label = reject_label(static_cast<RejectReason>(i));
    CHECK(label != "unknown");
    CHECK(label.find_first_not_of("abcdefghijklmnopqrstuvwxyz_") == std::string_view::npos);
    labels.insert(label);
  }
  CHECK(labels.size() == kRejectReasonCount);
  CHECK(reject_label(RejectReason::bad_count) == "bad_count");
  CHECK(reject_label(RejectReason::zero_exposure) == "zero_exposure");
  CHECK(reject_label(RejectReason::read_error) == "read_error");
  // The last reason is the last index the counts have room for.
  CHECK(kRejectReasonCount == 15);
}

TEST_CASE("a refusal describes itself with its place", "[core][reject]") {
  Rejection r{RejectReason::bad_count, SourcePos{"traps.csv", 118}, "count '-3' is negative"};
  CHECK(r.describe() == "traps.csv:118: bad_count: count '-3' is negative");
  r.where.line = 0;
  CHECK(r.describe() == "traps.csv: bad_count: count '-3' is negative");
  r.where.source.clear();
  CHECK(r.describe() == "bad_count: count '-3' is negative");
}

TEST_CASE("refusal counts add up by reason", "[core][reject]") {
  RejectCounts counts;
  CHECK(counts.total() == 0);
  counts.add(RejectReason::bad_time);
  counts.add(RejectReason::bad_time);
  counts.add(RejectReason::read_error);
  CHECK(counts[RejectReason::bad_time] == 2);
  CHECK(counts[RejectReason::read_error] == 1);
  CHECK(counts[RejectReason::bad_count] == 0);
  CHECK(counts.total() == 3);
}

}  // namespace
}  // namespace tallyd
