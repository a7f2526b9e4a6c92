#include "feed/line_splitter.h"

namespace tallyd {

LineSplitter::LineSplitter(std::size_t max_line_bytes) : max_line_bytes_(max_line_bytes) {}

void LineSplitter::push(std::string_view bytes) {
  if (dropping_) {
    const std::size_t nl = bytes.find('\n');
    if (nl == std::string_view::npos) return;  // still inside the long line
    dropping_ = false;
    ++line_number_;
    bytes.remove_prefix(nl + 1);
  }
  // Move the unconsumed tail to the front before appending, so the buffer
  // never holds lines that were already handed out.
  if (start_ > 0) {
    buffer_.erase(0, start_);
    scanned_ -= start_;
    start_ = 0;
  }
  buffer_.append(bytes);
}

Split LineSplitter::next_any() {
  if (dropping_) return {};
  const std::size_t nl = buffer_.find('\n', scanned_);
  if (nl == std::string::npos) {
    scanned_ = buffer_.size();
    // An unterminated line is surely too long once even a trailing '\r' could
    // not bring it back within the limit.
    if (buffer_.size() - start_ > max_line_bytes_ + 1) {
      Split s{SplitKind::too_long, std::string_view(buffer_).substr(start_, max_line_bytes_),
              line_number_};
      dropping_ = true;
      // The text stays valid until the next push(), which discards it.
      start_ = buffer_.size();
      scanned_ = start_;
      return s;
    }
    return {};
  }
  std::string_view text = std::string_view(buffer_).substr(start_, nl - start_);
  if (!text.empty() && text.back() == '\r') text.remove_suffix(1);
  const std::uint64_t number = line_number_++;
  start_ = nl + 1;
  scanned_ = start_;
  if (text.size() > max_line_bytes_)
    return {SplitKind::too_long, text.substr(0, max_line_bytes_), number};
  return {SplitKind::line, text, number};
}

Split LineSplitter::finish() {
  Split s = next_any();
  if (s.kind != SplitKind::need_more) return s;
  if (dropping_) {
    // The last line was too long and already reported; it simply ends here.
    dropping_ = false;
    ++line_number_;
  } else if (start_ < buffer_.size()) {
    std::string_view text = std::string_view(buffer_).substr(start_);
    if (text.back() == '\r') text.remove_suffix(1);
    const std::uint64_t number = line_number_++;
    s = text.size() > max_line_bytes_ ? Split{SplitKind::too_long, text.substr(0, max_line_bytes_), number}
                                      : Split{SplitKind::line, text, number};
  }
  // Leave the bytes in place (s.text points at them); the next push() drops them.
  start_ = buffer_.size();
  scanned_ = start_;
  return s;
}

}  // namespace tallyd
