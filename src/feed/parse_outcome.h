// ParseOutcome: what a feed parser made of one line.
#pragma once

#include <cstdint>
#include <utility>
#include <variant>

#include "core/observation.h"
#include "core/reject.h"

namespace tallyd {

enum class LineKind : std::uint8_t {
  record,    // the line is a good observation: record()
  rejected,  // the line was refused: rejection() says why and where
  skip,      // blank or comment line: nothing to do, not an error
};

class ParseOutcome {
 public:
  static ParseOutcome skip() { return ParseOutcome(std::monostate{}); }
  static ParseOutcome of(Observation record) { return ParseOutcome(std::move(record)); }
  static ParseOutcome of(Rejection rejection) { return ParseOutcome(std::move(rejection)); }

  LineKind kind() const {
    switch (value_.index()) {
      case 1: return LineKind::record;
      case 2: return LineKind::rejected;
      default: return LineKind::skip;
    }
  }

  // Preconditions: kind() == record for record(), kind() == rejected for rejection().
  Observation& record() { return std::get<Observation>(value_); }
  const Observation& record() const { return std::get<Observation>(value_); }
  Rejection& rejection() { return std::get<Rejection>(value_); }
  const Rejection& rejection() const { return std::get<Rejection>(value_); }

 private:
  using Value = std::variant<std::monostate, Observation, Rejection>;
  explicit ParseOutcome(Value value) : value_(std::move(value)) {}
  Value value_;
};

}  // namespace tallyd
