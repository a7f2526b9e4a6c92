#include "alert/alert.h"

#include <catch2/catch.hpp>

#include "alert/alert_format.h"

using namespace tallyd;

namespace {
Observation obs(std::int64_t count) {
  Observation o;
  o.time = parse_time("2025-08-14T06:00:00Z").value();
  o.series = "orchard-n03";
  o.count = count;
  o.exposure = 7;
  return o;
}
}  // namespace

TEST_CASE("judge_count alerts on the watched side only", "[alert]") {
  bounds::Bounds b{12.41, 3, 31, 2.113e-05, 0.99999};
  AlertSpec spec;
  spec.alpha = 0.001;
  spec.direction = Direction::both;
  auto a = judge_count(obs(57), b, spec);
  REQUIRE(a);
  CHECK(a->side == AlertSide::high);
  CHECK(a->p_value == 2.113e-05);
  spec.direction = Direction::low;
  CHECK_FALSE(judge_count(obs(57), b, spec));

  bounds::Bounds low{40.0, 22, 61, 1.0, 4e-5};
  spec.direction = Direction::both;
  auto l = judge_count(obs(5), low, spec);
  REQUIRE(l);
  CHECK(l->side == AlertSide::low);
  spec.direction = Direction::high;
  CHECK_FALSE(judge_count(obs(5), low, spec));
  // p exactly at alpha alerts (the bounds are defined so that count > upper iff p_high <= alpha).
  bounds::Bounds edge{10, 2, 20, 0.001, 1};
  CHECK(judge_count(obs(21), edge, AlertSpec{}));
}

TEST_CASE("alert JSON has fixed keys, order and notation", "[alert]") {
  bounds::Bounds b{12.41, 3, 31, 2.113e-05, 0.99999};
  auto a = judge_count(obs(57), b, AlertSpec{});
  REQUIRE(a);
  CHECK(alert_json(*a) ==
        R"({"time":"2025-08-14T06:00:00Z","series":"orchard-n03","count":57,"expected":12.4100,"lower":3,"upper":31,)"
        R"("p_value":2.113e-05,"direction":"high","exposure":7,"alpha":0.001,"detector":"bound",)"
        R"("statistic":2.113e-05})");
  a->series = "odd \"id\"\n";
  CHECK_THAT(alert_json(*a), Catch::Contains(R"("series":"odd \"id\"\n")"));
  CHECK_THAT(alert_text(*a), Catch::StartsWith("2025-08-14T06:00:00Z odd"));
}
