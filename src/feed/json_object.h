// JsonObjectReader: reads the members of one JSON object (RFC 8259) held in
// a single line, one member at a time, without building a document.
//
//   JsonObjectReader reader;
//   reader.start(line);
//   JsonMember m;
//   while (true) {
//     JsonStep s = reader.next(m);
//     if (s == JsonStep::member) use(m.key, m.type, m.text);
//     else break;   // end: the object is complete and well formed; broken: see problem()
//   }
//
// The whole line is checked, nested values included: strings must be
// well-formed UTF-8 with valid escapes, numbers must follow the JSON grammar,
// nothing may follow the object but blanks. A line is only known good once
// next() has returned `end`. Nested objects and arrays are checked and handed
// out as raw text; nesting deeper than 64 levels is refused.
//
// Member views point into the line or into the reader's buffers and stay
// valid until the next call to next() or start(). Buffers are reused, so
// reading does not allocate once they have grown. Duplicate keys are handed
// out as they come; deciding about them is the caller's business.
// Not thread-safe.
#pragma once

#include <cstddef>
#include <cstdint>
#include <string>
#include <string_view>

namespace tallyd {

enum class JsonType : std::uint8_t { string, number, boolean, null, object, array };

struct JsonMember {
  std::string_view key;  // unescaped
  JsonType type = JsonType::null;
  // string: the unescaped content; number: as written ("-1.5e3");
  // boolean/null: the literal; object/array: the raw text as written.
  std::string_view text;
  // number only: written without fraction or exponent ("17", "-3").
  bool integer_syntax = false;
};

enum class JsonStep : std::uint8_t {
  member,  // the next member was read into the JsonMember
  end,     // the object ended and the line is well formed
  broken,  // the line is not one well-formed JSON object: problem() says why
};

class JsonObjectReader {
 public:
  // Starts reading `line`, which must outlive the reading.
  void start(std::string_view line);

  JsonStep next(JsonMember& member);

  // After `broken`: a short description ("expected ':' after a member name")
  // and the 0-based byte offset where reading stopped.
  std::string_view problem() const { return problem_; }
  std::size_t problem_offset() const { return problem_at_; }
  // After `broken`: true when the line is not an object at all (does not
  // start with '{'), as opposed to an object that is badly written.
  bool not_an_object() const { return not_an_object_; }

 private:
  static constexpr std::size_t kFail = static_cast<std::size_t>(-1);

  std::size_t skip_blanks(std::size_t i) const;
  std::size_t fail(std::size_t at, std::string_view why);
  std::size_t read_string(std::size_t i, std::string& buffer, std::string_view& out);
  std::size_t read_escape(std::size_t i, std::string& buffer);
  std::size_t read_number(std::size_t i, bool& integer_syntax);
  std::size_t read_literal(std::size_t i, std::string_view word);
  std::size_t read_value(std::size_t i, int depth, std::string& buffer, JsonMember& out);
  std::size_t skip_container(std::size_t i, int depth);
  JsonStep finish_object(std::size_t after_brace);

  enum class State : std::uint8_t { first, after_member, done };

  std::string_view line_;
  std::size_t pos_ = 0;
  State state_ = State::done;
  std::string key_buffer_;
  std::string value_buffer_;
  std::string scratch_;  // strings inside nested values: checked, then dropped
  std::string_view problem_;
  std::size_t problem_at_ = 0;
  bool not_an_object_ = false;
};

}  // namespace tallyd
