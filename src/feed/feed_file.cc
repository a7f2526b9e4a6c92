#include "feed/feed_file.h"

#include "feed/field_check.h"

namespace tallyd {
namespace {

// The text of a split, without a UTF-8 byte order mark if it is line 1.
std::string_view split_text(const Split& split) {
  std::string_view text = split.text;
  if (split.number == 1 && text.substr(0, 3) == "\xEF\xBB\xBF") text.remove_prefix(3);
  return text;
}

// A line (or the start of a too-long line) that is nothing to read.
bool is_skippable(SplitKind kind, std::string_view text) {
  if (kind == SplitKind::line) return is_blank_or_comment(text);
  const std::string_view t = trim_blanks(text);
  return !t.empty() && t.front() == '#';
}

}  // namespace

FeedFile::FeedFile(std::unique_ptr<ByteSource> source, std::string name, const ReadOptions& options)
    : source_(std::move(source)),
      where_{std::move(name), 0},
      options_(options),
      splitter_(options.max_line_bytes),
      chunk_(options.chunk_bytes) {}

Result<FeedFile> FeedFile::open(const std::string& path, const ReadOptions& options) {
  Result<std::unique_ptr<FileSource>> source = FileSource::open(path);
  if (!source) return source.error();
  return read_from(std::move(source).value(), path, format_from_path(path), options);
}

Result<FeedFile> FeedFile::read_from(std::unique_ptr<ByteSource> source, std::string name,
                                     std::optional<Format> format, const ReadOptions& options) {
  if (options.max_line_bytes == 0) return Error{name + ": max_line_bytes must be at least 1"};
  if (options.chunk_bytes == 0) return Error{name + ": chunk_bytes must be at least 1"};
  FeedFile feed(std::move(source), std::move(name), options);
  feed.format_ = format;
  if (Status s = feed.settle_format(); !s) return s.error();
  return feed;
}

Split FeedFile::pull() {
  while (true) {
    Split s = at_end_ ? splitter_.finish() : splitter_.next();
    if (s.kind != SplitKind::need_more || at_end_ || read_failure_) return s;
    Result<std::size_t> n = source_->read(chunk_);
    if (!n) {
      // Lines completed before the failure have been handed out; the one
      // being read is incomplete and lost with the rest.
      read_failure_ = n.error().message;
      failed_at_line_ = splitter_.line_number();
      return {};
    }
    if (*n == 0) {
      at_end_ = true;
    } else {
      splitter_.push(std::string_view(chunk_.data(), *n));
    }
  }
}

Status FeedFile::settle_format() {
  if (format_ == Format::jsonl) {
    parser_ = RecordParser::jsonl();
    return Ok{};
  }
  while (true) {
    const Split s = pull();
    if (s.kind == SplitKind::need_more) {
      if (read_failure_) return Error{*read_failure_};
      done_ = true;  // nothing but blank and comment lines
      return Ok{};
    }
    const std::string_view text = split_text(s);
    if (is_skippable(s.kind, text)) continue;
    if (!format_) format_ = format_of_first_line(text);
    if (*format_ == Format::jsonl) {
      parser_ = RecordParser::jsonl();
      held_ = HeldLine{s.kind, std::string(text), s.number};
      return Ok{};
    }
    if (s.kind == SplitKind::too_long)
      return Error{where_.source + ":" + std::to_string(s.number) + ": CSV header is longer than " +
                   std::to_string(options_.max_line_bytes) + " bytes"};
    Result<RecordParser> parser = RecordParser::csv(text, SourcePos{where_.source, s.number});
    if (!parser) return parser.error();
    parser_ = std::move(parser).value();
    return Ok{};
  }
}

bool FeedFile::emit(const Split& split, FeedItem& out) {
  const std::string_view text = split_text(split);
  where_.line = split.number;
  if (split.kind == SplitKind::too_long) {
    if (is_skippable(split.kind, text)) return false;
    out.value = Rejection{RejectReason::line_too_long, where_,
                          "line is longer than " + std::to_string(options_.max_line_bytes) +
                              " bytes and was skipped; it starts " + quote_value(text)};
    return true;
  }
  return parser_->parse_into(text, where_, out) != LineKind::skip;
}

bool FeedFile::next(FeedItem& out) {
  if (done_) return false;
  if (held_) {
    const HeldLine held = std::move(*held_);
    held_.reset();
    if (emit(Split{held.kind, held.text, held.number}, out)) return true;
  }
  while (true) {
    // The usual case, a line already buffered, straight from the splitter:
    // through pull() the Split was copied back through memory once per line.
    // (Asking the splitter again after need_more changes nothing.)
    Split s = splitter_.next();
    if (s.kind == SplitKind::need_more) s = pull();
    if (s.kind == SplitKind::need_more) {
      done_ = true;
      if (!read_failure_) return false;
      out.value = Rejection{RejectReason::read_error, SourcePos{where_.source, failed_at_line_},
                            *read_failure_ + "; the input from this line on is lost"};
      return true;
    }
    if (emit(s, out)) return true;
  }
}

}  // namespace tallyd
