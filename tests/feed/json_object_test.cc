#include "feed/json_object.h"

#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include <string>
#include <vector>

namespace tallyd {
namespace {

struct Read {
  bool ok = false;
  std::vector<std::pair<std::string, std::string>> members;  // key, text
  std::vector<JsonType> types;
  std::string problem;
};

Read read_all(std::string_view line) {
  JsonObjectReader reader;
  reader.start(line);
  Read r;
  JsonMember m;
  while (true) {
    JsonStep s = reader.next(m);
    if (s == JsonStep::member) {
      r.members.emplace_back(std::string(m.key), std::string(m.text));
      r.types.push_back(m.type);
      continue;
    }
    r.ok = s == JsonStep::end;
    r.problem = std::string(reader.problem());
    return r;
  }
}

TEST_CASE("JSON object members come out with their types and text", "[feed][json]") {
  Read r = read_all(R"( {"a": "x", "b":-1.5e3, "c" : 17, "d": true, "e": null, "f": [1, {"g": "h"}], "h": {}} )");
  REQUIRE(r.ok);
  using P = std::pair<std::string, std::string>;
  CHECK(r.members == std::vector<P>{{"a", "x"}, {"b", "-1.5e3"}, {"c", "17"}, {"d", "true"},
                                    {"e", "null"}, {"f", "[1, {\"g\": \"h\"}]"}, {"h", "{}"}});
  CHECK(r.types == std::vector<JsonType>{JsonType::string, JsonType::number, JsonType::number, JsonType::boolean,
                                         JsonType::null, JsonType::array, JsonType::object});
  CHECK(read_all("{}").ok);
  CHECK(read_all("{}").members.empty());
}

TEST_CASE("JSON numbers report integer syntax", "[feed][json]") {
  JsonObjectReader reader;
  JsonMember m;
  for (auto [text, integer] : std::vector<std::pair<std::string, bool>>{
           {"3", true}, {"-0", true}, {"3.0", false}, {"3e2", false}, {"30E-1", false}}) {
    const std::string line = "{\"n\":" + text + "}";
    reader.start(line);
    REQUIRE(reader.next(m) == JsonStep::member);
    CHECK(m.integer_syntax == integer);
    CHECK(m.text == text);
  }
}

TEST_CASE("JSON string escapes are decoded", "[feed][json]") {
  Read r = read_all(R"({"k\u00e9y": "a\"b\\c\/d\n\t", "s": "\ud83d\udc1d", "\u20ac": "\u00fc"})");
  REQUIRE(r.ok);
  CHECK(r.members[0].first == "k\xC3\xA9y");
  CHECK(r.members[0].second == "a\"b\\c/d\n\t");
  CHECK(r.members[1].second == "\xF0\x9F\x90\x9D");  // a surrogate pair is one code point
  CHECK(r.members[2].first == "\xE2\x82\xAC");
  CHECK(r.members[2].second == "\xC3\xBC");
}

TEST_CASE("JSON reader agrees with nlohmann::json on what is one well-formed object", "[feed][json]") {
  const std::vector<std::string> lines = {
      R"({"a":1})", R"({"a":1,})", R"({"a" 1})", R"({a:1})", R"({"a":01})", R"({"a":-})", R"({"a":1.})",
      R"({"a":.5})", R"({"a":1e})", R"({"a":1e+})", R"({"a":1E-7})", R"({"a":-0.0e0})", R"({"a":tru})",
      R"({"a":true} x)", R"({"a":true}})", R"({"a":[1,2,]})", R"({"a":[1,2})", R"({"a":{"b":[{}]}})",
      R"({"a":"x)", R"({"a":"\x"})", R"({"a":"\u12"})", R"({"a":"\ud800"})", R"({"a":"\udc00"})",
      R"({"a":"\ud800\u0041"})", "{\"a\":\"tab\there\"}", "{\"a\":\"\xC3\xBC\"}", "{\"a\":\"\xFF\"}",
      "{\"a\":\"\xED\xA0\x80\"}", R"([1,2])", R"(17)", R"("s")", R"( { "a" : [ ] , "b" : { } } )", R"({"":0})",
      R"({"a":nul})", R"({"a":null,"a":2})", R"({"a":1}{"b":2})", R"({,})", R"({"a"})", R"({"a":})",
      R"({"a":"\/\b\f\n\r\t\"\\"})", R"({"a":1 , "b":2})", R"({"a":[[[[[[1]]]]]]})", "{\"a\":1}\t ",
      R"({"a":-01})", R"({"a":"\uD83D\uDC1D"})"};
  for (const std::string& line : lines) {
    INFO(line);
    const bool want = nlohmann::json::accept(line) && line.find_first_not_of(" \t") != std::string::npos &&
                      line[line.find_first_not_of(" \t")] == '{';
    CHECK(read_all(line).ok == want);
  }
}

TEST_CASE("JSON numbers beyond a double are still well formed", "[feed][json]") {
  // RFC 8259 leaves the range to the reader (nlohmann::json refuses them);
  // here the field rules decide, so the value must come through as written.
  Read r = read_all(R"({"a":2.5e400})");
  REQUIRE(r.ok);
  CHECK(r.members[0].second == "2.5e400");
}

TEST_CASE("JSON decoded strings agree with nlohmann::json", "[feed][json]") {
  const std::string line =
      R"({"a":"plain","b":"q\"uote","c":"\u0041\u00df\u6c34\ud834\udd1e","d":"\\\/","e":"M)"
      "\xC3\xBC"
      R"(hle"})";
  Read r = read_all(line);
  REQUIRE(r.ok);
  const nlohmann::json j = nlohmann::json::parse(line);
  for (const auto& [key, text] : r.members) CHECK(j.at(key).get<std::string>() == text);
}

TEST_CASE("JSON problems are described with their place", "[feed][json]") {
  JsonObjectReader reader;
  JsonMember m;
  reader.start(R"({"a":1 "b":2})");
  CHECK(reader.next(m) == JsonStep::member);
  CHECK(reader.next(m) == JsonStep::broken);
  CHECK(reader.problem() == "expected ',' or '}' after a member");
  CHECK(reader.problem_offset() == 7);
  CHECK_FALSE(reader.not_an_object());
  CHECK(reader.next(m) == JsonStep::broken);  // stays broken

  reader.start("[1]");
  CHECK(reader.next(m) == JsonStep::broken);
  CHECK(reader.not_an_object());

  std::string deep = "{\"a\":" + std::string(64, '[') + std::string(64, ']') + "}";
  reader.start(deep);
  CHECK(reader.next(m) == JsonStep::member);
  deep = "{\"a\":" + std::string(65, '[') + std::string(65, ']') + "}";
  reader.start(deep);
  CHECK(reader.next(m) == JsonStep::broken);
  CHECK(reader.problem() == "values are nested too deeply");
}

}  // namespace
}  // namespace tallyd
