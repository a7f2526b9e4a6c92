#include "feed/json_object.h"

#include "feed/utf8.h"

namespace tallyd {
namespace {

constexpr int kMaxDepth = 64;

bool is_json_blank(char c) { return c == ' ' || c == '\t' || c == '\n' || c == '\r'; }
bool is_digit(char c) { return c >= '0' && c <= '9'; }

int hex_value(char c) {
  if (c >= '0' && c <= '9') return c - '0';
  if (c >= 'a' && c <= 'f') return c - 'a' + 10;
  if (c >= 'A' && c <= 'F') return c - 'A' + 10;
  return -1;
}

void append_utf8(std::string& out, std::uint32_t cp) {
  if (cp < 0x80) {
    out += static_cast<char>(cp);
  } else if (cp < 0x800) {
    out += static_cast<char>(0xC0 | (cp >> 6));
    out += static_cast<char>(0x80 | (cp & 0x3F));
  } else if (cp < 0x10000) {
    out += static_cast<char>(0xE0 | (cp >> 12));
    out += static_cast<char>(0x80 | ((cp >> 6) & 0x3F));
    out += static_cast<char>(0x80 | (cp & 0x3F));
  } else {
    out += static_cast<char>(0xF0 | (cp >> 18));
    out += static_cast<char>(0x80 | ((cp >> 12) & 0x3F));
    out += static_cast<char>(0x80 | ((cp >> 6) & 0x3F));
    out += static_cast<char>(0x80 | (cp & 0x3F));
  }
}

}  // namespace

void JsonObjectReader::start(std::string_view line) {
  line_ = line;
  problem_ = {};
  problem_at_ = 0;
  not_an_object_ = false;
  pos_ = skip_blanks(0);
  if (pos_ >= line_.size() || line_[pos_] != '{') {
    not_an_object_ = true;
    fail(pos_, "the line is not a JSON object");
    state_ = State::done;
    return;
  }
  pos_ = skip_blanks(pos_ + 1);
  state_ = State::first;
}

std::size_t JsonObjectReader::skip_blanks(std::size_t i) const {
  while (i < line_.size() && is_json_blank(line_[i])) ++i;
  return i;
}

std::size_t JsonObjectReader::fail(std::size_t at, std::string_view why) {
  if (problem_.empty()) {  // keep the innermost (first) cause
    problem_ = why;
    problem_at_ = at;
  }
  return kFail;
}

JsonStep JsonObjectReader::finish_object(std::size_t after_brace) {
  state_ = State::done;
  const std::size_t i = skip_blanks(after_brace);
  if (i != line_.size()) {
    fail(i, "text follows the end of the object");
    return JsonStep::broken;
  }
  return JsonStep::end;
}

JsonStep JsonObjectReader::next(JsonMember& member) {
  if (state_ == State::done) return problem_.empty() ? JsonStep::end : JsonStep::broken;
  std::size_t i = pos_;
  if (state_ == State::first) {
    if (i < line_.size() && line_[i] == '}') return finish_object(i + 1);
  } else {
    if (i < line_.size() && line_[i] == '}') return finish_object(i + 1);
    if (i >= line_.size() || line_[i] != ',') {
      state_ = State::done;
      fail(i, "expected ',' or '}' after a member");
      return JsonStep::broken;
    }
    i = skip_blanks(i + 1);
  }
  state_ = State::done;  // until this member has been read completely
  if (i >= line_.size() || line_[i] != '"') {
    fail(i, "expected a member name in double quotes");
    return JsonStep::broken;
  }
  i = read_string(i, key_buffer_, member.key);
  if (i == kFail) return JsonStep::broken;
  i = skip_blanks(i);
  if (i >= line_.size() || line_[i] != ':') {
    fail(i, "expected ':' after a member name");
    return JsonStep::broken;
  }
  i = read_value(skip_blanks(i + 1), 1, value_buffer_, member);
  if (i == kFail) return JsonStep::broken;
  pos_ = skip_blanks(i);
  state_ = State::after_member;
  return JsonStep::member;
}

std::size_t JsonObjectReader::read_value(std::size_t i, int depth, std::string& buffer, JsonMember& out) {
  if (i >= line_.size()) return fail(i, "expected a value");
  const std::size_t start = i;
  std::size_t end = kFail;
  out.integer_syntax = false;
  switch (line_[i]) {
    case '"':
      out.type = JsonType::string;
      return read_string(i, buffer, out.text);
    case '{':
    case '[':
      out.type = line_[i] == '{' ? JsonType::object : JsonType::array;
      end = skip_container(i, depth);
      break;
    case 't':
      out.type = JsonType::boolean;
      end = read_literal(i, "true");
      break;
    case 'f':
      out.type = JsonType::boolean;
      end = read_literal(i, "false");
      break;
    case 'n':
      out.type = JsonType::null;
      end = read_literal(i, "null");
      break;
    default:
      if (line_[i] != '-' && !is_digit(line_[i])) return fail(i, "expected a value");
      out.type = JsonType::number;
      end = read_number(i, out.integer_syntax);
  }
  if (end == kFail) return kFail;
  out.text = line_.substr(start, end - start);
  return end;
}

std::size_t JsonObjectReader::read_literal(std::size_t i, std::string_view word) {
  if (line_.substr(i, word.size()) != word) return fail(i, "expected a value");
  return i + word.size();
}

std::size_t JsonObjectReader::read_number(std::size_t i, bool& integer_syntax) {
  // -?(0|[1-9][0-9]*)(\.[0-9]+)?([eE][+-]?[0-9]+)?
  const std::size_t n = line_.size();
  if (line_[i] == '-') ++i;
  if (i < n && line_[i] == '0') {
    ++i;
  } else if (i < n && is_digit(line_[i])) {
    while (i < n && is_digit(line_[i])) ++i;
  } else {
    return fail(i, "a number needs a digit here");
  }
  integer_syntax = true;
  if (i < n && line_[i] == '.') {
    integer_syntax = false;
    ++i;
    if (i >= n || !is_digit(line_[i])) return fail(i, "a number needs a digit after '.'");
    while (i < n && is_digit(line_[i])) ++i;
  }
  if (i < n && (line_[i] == 'e' || line_[i] == 'E')) {
    integer_syntax = false;
    ++i;
    if (i < n && (line_[i] == '+' || line_[i] == '-')) ++i;
    if (i >= n || !is_digit(line_[i])) return fail(i, "a number needs a digit in its exponent");
    while (i < n && is_digit(line_[i])) ++i;
  }
  return i;
}

std::size_t JsonObjectReader::read_string(std::size_t i, std::string& buffer, std::string_view& out) {
  const std::size_t first = i + 1;  // past the opening quote
  bool copying = false;             // set at the first escape: from then on, build `buffer`
  std::size_t segment = first;      // start of the bytes not yet copied
  i = first;
  while (true) {
    if (i >= line_.size()) return fail(i, "a string is not closed");
    const unsigned char c = static_cast<unsigned char>(line_[i]);
    if (c == '"') {
      if (copying) {
        buffer.append(line_.substr(segment, i - segment));
        out = buffer;
      } else {
        out = line_.substr(first, i - first);
      }
      return i + 1;
    }
    if (c == '\\') {
      if (!copying) {
        buffer.clear();
        copying = true;
      }
      buffer.append(line_.substr(segment, i - segment));
      i = read_escape(i, buffer);
      if (i == kFail) return kFail;
      segment = i;
      continue;
    }
    if (c < 0x20) return fail(i, "a string holds a raw control character");
    if (c >= 0x80) {
      const std::size_t length = utf8_sequence_length(line_, i);
      if (length == 0) return fail(i, "a string is not valid UTF-8");
      i += length;
      continue;
    }
    ++i;
  }
}

std::size_t JsonObjectReader::read_escape(std::size_t i, std::string& buffer) {
  // line_[i] is the backslash.
  if (i + 1 >= line_.size()) return fail(i, "a string is not closed");
  const char e = line_[i + 1];
  switch (e) {
    case '"': buffer += '"'; return i + 2;
    case '\\': buffer += '\\'; return i + 2;
    case '/': buffer += '/'; return i + 2;
    case 'b': buffer += '\b'; return i + 2;
    case 'f': buffer += '\f'; return i + 2;
    case 'n': buffer += '\n'; return i + 2;
    case 'r': buffer += '\r'; return i + 2;
    case 't': buffer += '\t'; return i + 2;
    case 'u': break;
    default: return fail(i, "a string has an unknown escape");
  }
  auto hex4 = [&](std::size_t at) -> long {
    if (at + 4 > line_.size()) return -1;
    long v = 0;
    for (std::size_t k = 0; k < 4; ++k) {
      const int h = hex_value(line_[at + k]);
      if (h < 0) return -1;
      v = v * 16 + h;
    }
    return v;
  };
  const long unit = hex4(i + 2);
  if (unit < 0) return fail(i, "a \\u escape needs four hex digits");
  std::size_t next = i + 6;
  std::uint32_t cp = static_cast<std::uint32_t>(unit);
  if (cp >= 0xDC00 && cp <= 0xDFFF) return fail(i, "a \\u escape is a lone low surrogate");
  if (cp >= 0xD800 && cp <= 0xDBFF) {
    // A high surrogate must be followed by an escaped low surrogate; the pair
    // encodes one code point above U+FFFF.
    if (next + 1 >= line_.size() || line_[next] != '\\' || line_[next + 1] != 'u')
      return fail(i, "a \\u escape is a lone high surrogate");
    const long low = hex4(next + 2);
    if (low < 0xDC00 || low > 0xDFFF) return fail(i, "a \\u escape is a lone high surrogate");
    cp = 0x10000 + ((cp - 0xD800) << 10) + (static_cast<std::uint32_t>(low) - 0xDC00);
    next += 6;
  }
  append_utf8(buffer, cp);
  return next;
}

std::size_t JsonObjectReader::skip_container(std::size_t i, int depth) {
  if (depth > kMaxDepth) return fail(i, "values are nested too deeply");
  const bool object = line_[i] == '{';
  const char close = object ? '}' : ']';
  i = skip_blanks(i + 1);
  if (i < line_.size() && line_[i] == close) return i + 1;
  JsonMember inner;
  std::string_view ignored;
  while (true) {
    if (object) {
      if (i >= line_.size() || line_[i] != '"') return fail(i, "expected a member name in double quotes");
      i = read_string(i, scratch_, ignored);
      if (i == kFail) return kFail;
      i = skip_blanks(i);
      if (i >= line_.size() || line_[i] != ':') return fail(i, "expected ':' after a member name");
      i = skip_blanks(i + 1);
    }
    i = read_value(i, depth + 1, scratch_, inner);
    if (i == kFail) return kFail;
    i = skip_blanks(i);
    if (i < line_.size() && line_[i] == close) return i + 1;
    if (i >= line_.size() || line_[i] != ',')
      return fail(i, object ? "expected ',' or '}' in an object" : "expected ',' or ']' in an array");
    i = skip_blanks(i + 1);
  }
}

}  // namespace tallyd
