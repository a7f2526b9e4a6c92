#include "feed/csv_fields.h"

#include <catch2/catch.hpp>

#include <string>
#include <vector>

namespace tallyd {
namespace {

std::vector<std::string> fields_of(CsvFields& f, std::string_view line) {
  Status s = f.split(line);
  REQUIRE(s.ok());
  std::vector<std::string> out;
  for (std::size_t i = 0; i < f.size(); ++i) out.emplace_back(f[i]);
  return out;
}

using V = std::vector<std::string>;

TEST_CASE("CSV fields are split at commas and trimmed", "[feed][csv]") {
  CsvFields f;
  CHECK(fields_of(f, "a,b,c") == V{"a", "b", "c"});
  CHECK(fields_of(f, " a , b\t,c ") == V{"a", "b", "c"});
  CHECK(fields_of(f, "a,,c") == V{"a", "", "c"});
  CHECK(fields_of(f, "a,") == V{"a", ""});
  CHECK(fields_of(f, "") == V{""});
  CHECK(fields_of(f, "a\"b,c") == V{"a\"b", "c"});  // a quote inside a bare field is kept
}

TEST_CASE("quoted CSV fields follow RFC 4180 on one line", "[feed][csv]") {
  CsvFields f;
  CHECK(fields_of(f, "\"trap 4, north\",3") == V{"trap 4, north", "3"});
  CHECK(fields_of(f, "\"he said \"\"hi\"\"\",2") == V{"he said \"hi\"", "2"});
  CHECK(fields_of(f, "\"\"\"\",\"\"") == V{"\"", ""});
  CHECK(fields_of(f, "  \" keep spaces \"  ,x") == V{" keep spaces ", "x"});
  CHECK(fields_of(f, "\"a\"\"b\",\"c\"\"d\",e") == V{"a\"b", "c\"d", "e"});
}

TEST_CASE("broken CSV quoting is an error naming the field", "[feed][csv]") {
  CsvFields f;
  Status s = f.split("x,\"open,3");
  REQUIRE_FALSE(s.ok());
  CHECK(s.error().message == "field 2 opens a quote that is not closed on its line");
  s = f.split("\"a\"b,c");
  REQUIRE_FALSE(s.ok());
  CHECK(s.error().message == "field 1 has text after its closing quote: 'b,c'");
}

TEST_CASE("CSV fields from an earlier line do not leak into the next", "[feed][csv]") {
  CsvFields f;
  CHECK(fields_of(f, "\"a\"\"1\",\"b\"\"2\",c,d") == V{"a\"1", "b\"2", "c", "d"});
  CHECK(fields_of(f, "\"x\"\"\",y") == V{"x\"", "y"});
}

}  // namespace
}  // namespace tallyd
