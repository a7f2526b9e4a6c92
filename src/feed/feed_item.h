// FeedItem: what reading a feed yields, one at a time: a good observation, or
// the refusal of a line (which says where the line was and why).
#pragma once

#include <variant>

#include "core/observation.h"
#include "core/reject.h"

namespace tallyd {

struct FeedItem {
  std::variant<Observation, Rejection> value;

  bool is_record() const { return value.index() == 0; }
  // Preconditions: is_record() for record(), !is_record() for rejection().
  Observation& record() { return std::get<Observation>(value); }
  const Observation& record() const { return std::get<Observation>(value); }
  Rejection& rejection() { return std::get<Rejection>(value); }
  const Rejection& rejection() const { return std::get<Rejection>(value); }

  const SourcePos& where() const {
    return is_record() ? record().where : rejection().where;
  }
};

}  // namespace tallyd
