#include "tune/progress.h"

#include <catch2/catch.hpp>

#include <cstdio>
#include <string>

using namespace tallyd::tune;

TEST_CASE("time left is written for people", "[tune]") {
  CHECK(format_seconds_left(4.24) == "4.2 s");
  CHECK(format_seconds_left(190) == "3 min 10 s");
  CHECK(format_seconds_left(3900) == "1 h 05 min");
  CHECK(format_seconds_left(-1) == "?");
}

TEST_CASE("a disabled progress line writes nothing, an enabled one draws records/s", "[tune]") {
  for (bool enabled : {false, true}) {
    std::FILE* f = std::tmpfile();
    REQUIRE(f);
    {
      ProgressLine line(4096, enabled, f);
      for (int i = 0; i < 2048; ++i) line.tick("stage");
    }
    std::rewind(f);
    std::string text;
    for (int c = std::fgetc(f); c != EOF; c = std::fgetc(f)) text += static_cast<char>(c);
    std::fclose(f);
    CHECK((text.find("records/s") != std::string::npos) == enabled);
  }
}
