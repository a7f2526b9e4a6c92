// A StateSource that hands out a string's bytes at most `piece` at a time,
// as a checkpoint body read from its file in pieces would arrive: tests of
// streaming readers cut the same state at every piece size.
#pragma once

#include <algorithm>
#include <cstddef>
#include <cstring>
#include <string_view>

#include "core/state_codec.h"

namespace tallyd::testing {

class PieceSource final : public StateSource {
 public:
  // `bytes` must outlive the source.
  PieceSource(std::string_view bytes, std::size_t piece) : bytes_(bytes), piece_(piece) {}
  std::size_t read(char* into, std::size_t max) override {
    const std::size_t n = std::min({max, piece_, bytes_.size()});
    std::memcpy(into, bytes_.data(), n);
    bytes_.remove_prefix(n);
    return n;
  }

 private:
  std::string_view bytes_;
  std::size_t piece_;
};

}  // namespace tallyd::testing
