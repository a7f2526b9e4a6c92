#include "daemon/intake.h"

#include <catch2/catch.hpp>


#include "support/temp_dir.h"

using namespace tallyd;
using namespace tallyd::daemon;

namespace {

Observation at(const std::string& series, std::int64_t days, std::int64_t count) {
  Observation o;
  o.time = parse_time("2025-07-01T05:00:00Z").value() + Seconds{days * 86400};
  o.series = series;
  o.count = count;
  o.where = SourcePos{"push", static_cast<std::uint64_t>(days + 1)};
  return o;
}

}  // namespace

TEST_CASE("intake writes silence and recovery lines, and a tick moves the clock without a record",
          "[daemon][intake]") {
  // The wall clock of [intake] clock = "wall" reaches the engine through
  // Intake::tick; here it is given, so the test does not depend on time.
  testing::TempDir dir;
  const std::string json = dir.path("alerts.jsonl");
  auto log = AlertLog::open(json, "");
  REQUIRE(log);
  SettingsTable settings;
  settings.defaults.model.min_history = 5;
  settings.defaults.detect.silence = true;
  EngineLimits limits;
  limits.arrival.late_tolerance = Seconds{86400};
  Intake intake(std::make_unique<Engine>(settings, limits), **log);
  SourceFigures figures;
  for (std::int64_t d = 0; d < 10; ++d) {
    ParseOutcome o = ParseOutcome::of(at("meter-1", d, 4));
    intake.offer(o, figures, std::chrono::steady_clock::now());
  }
  CHECK(intake.engine().held_count() == 1);  // day 9 waits for day 10
  // No record for 20 days: a tick releases the held record, then finds the silence.
  intake.tick(at("x", 30, 0).time);
  CHECK(intake.engine().held_count() == 0);
  CHECK(intake.engine().counters().records == 10);
  ParseOutcome back = ParseOutcome::of(at("meter-1", 31, 6));
  intake.offer(back, figures, std::chrono::steady_clock::now());
  intake.tick(at("x", 33, 0).time);  // releases day 31 (tolerance 1 day)
  const std::string text = testing::read_text(json);
  CHECK(text ==
        R"({"time":"2025-07-13T05:00:00Z","series":"meter-1","count":0,"expected":0.0000,"lower":0,"upper":0,"p_value":1,"direction":"low","exposure":0,"alpha":0,"detector":"silence","statistic":86400,"episode":"meter-1/low/1","episode_state":"new","last_seen":"2025-07-10T05:00:00Z"})"
        "\n"
        R"({"time":"2025-08-01T05:00:00Z","series":"meter-1","count":6,"expected":0.0000,"lower":0,"upper":0,"p_value":1,"direction":"low","exposure":1,"alpha":0,"detector":"silence_end","statistic":1.9008e+06,"last_seen":"2025-07-10T05:00:00Z"})"
        "\n");
  CHECK(intake.last_alerts().size() == 2);

  // A refusal by the hold is counted against the source.
  ParseOutcome dup = ParseOutcome::of(at("meter-1", 31, 6));
  intake.offer(dup, figures, std::chrono::steady_clock::now());
  CHECK(figures.rejected == 1);
  CHECK(intake.engine().counters().rejected[RejectReason::duplicate_time] == 1);
}
