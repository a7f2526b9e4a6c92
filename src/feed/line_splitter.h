// LineSplitter: cuts a byte stream that arrives in chunks of any size into
// lines, with a bound on line length and on the memory it holds.
//
//   LineSplitter lines(64 * 1024);
//   while (read a chunk) {
//     lines.push(chunk);
//     for (Split s = lines.next(); s.kind != SplitKind::need_more; s = lines.next()) use(s);
//   }
//   for (Split s = lines.finish(); s.kind != SplitKind::need_more; s = lines.finish()) use(s);
//
// Lines end at '\n'; one '\r' right before it is dropped too (CRLF input). A
// '\r' anywhere else is part of the line. Line numbers are 1-based and count
// every line, blank, too long or not.
//
// Memory: when next() is called until need_more before each push(), the
// splitter holds at most max_line_bytes + 1 bytes plus the last chunk pushed,
// whatever the input. A line over the limit is reported once (too_long) and
// the rest of it is dropped as it arrives, never buffered.
//
// Not thread-safe; one splitter per stream.
#pragma once

#include <cstddef>
#include <cstdint>
#include <cstring>
#include <string>
#include <string_view>

namespace tallyd {

enum class SplitKind : std::uint8_t {
  line,       // `text` is a complete line, without its "\n" or "\r\n"
  too_long,   // line `number` is longer than max_line_bytes; `text` is its start
  need_more,  // no complete line is buffered: push() more bytes (or finish())
};

struct Split {
  SplitKind kind = SplitKind::need_more;
  // For `line`, the whole line; for `too_long`, its first max_line_bytes
  // bytes, for messages. Points into the splitter's buffer: valid until the
  // next push().
  std::string_view text;
  std::uint64_t number = 0;  // 1-based line number; 0 with need_more
};

class LineSplitter {
 public:
  // max_line_bytes: the longest line accepted, not counting "\n" or "\r\n".
  explicit LineSplitter(std::size_t max_line_bytes);

  // Appends bytes of the stream. Bytes of a line already reported too_long are
  // dropped up to its '\n'. Invalidates the text of earlier Splits.
  void push(std::string_view bytes);

  // The next complete line, a too_long report, or need_more.
  // (Inline, below: the usual case, a whole line within the limit, is then
  // built where the caller uses it instead of being copied back through
  // memory once per line.)
  Split next();

  // End of input: like next(), but the bytes after the last '\n' count as a
  // final line (a '\r' at their end is dropped). Call until need_more, which
  // means everything has been handed out; a further push() starts a new line.
  Split finish();

  // Number of the line not yet handed out that the next bytes belong to.
  std::uint64_t line_number() const { return line_number_; }

  // Bytes held right now; for tests of the memory bound.
  std::size_t buffered_bytes() const { return buffer_.size() - start_; }

 private:
  // next() for every case (the inline part handles only the usual one).
  Split next_any();

  std::size_t max_line_bytes_;
  std::string buffer_;          // unconsumed bytes are [start_, size())
  std::size_t start_ = 0;       // first byte of the next line
  std::size_t scanned_ = 0;     // bytes before this offset hold no '\n'
  std::uint64_t line_number_ = 1;  // number of the line that starts at start_
  bool dropping_ = false;       // inside a line already reported too_long
};

inline Split LineSplitter::next() {
  if (!dropping_) {
    const char* const base = buffer_.data();
    const void* nl = std::memchr(base + scanned_, '\n', buffer_.size() - scanned_);
    if (nl != nullptr) {
      const std::size_t end = static_cast<std::size_t>(static_cast<const char*>(nl) - base);
      std::size_t length = end - start_;
      if (length > 0 && base[end - 1] == '\r') --length;
      if (length <= max_line_bytes_) {
        const Split s{SplitKind::line, std::string_view(base + start_, length), line_number_++};
        start_ = end + 1;
        scanned_ = start_;
        return s;
      }
    }
  }
  return next_any();
}

}  // namespace tallyd
