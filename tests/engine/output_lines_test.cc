#include "engine/output_lines.h"

#include <catch2/catch.hpp>

#include "bounds/random.h"

// The engine passes every alert it returns through its episode tracker (the
// rule of issue 3: an alert opens an episode for its series and direction,
// further alerts continue it, a configured number of in-bound records closes
// it), and output_lines writes them in one fixed order.

using namespace tallyd;

namespace {

Observation record(const std::string& series, std::int64_t day, std::int64_t count) {
  Observation o;
  o.time = parse_time("2025-01-01T06:00:00Z").value() + Seconds{day * 86400};
  o.series = series;
  o.count = count;
  o.exposure = 1.0;
  o.where = SourcePos{"test", static_cast<std::uint64_t>(day + 2)};
  return o;
}

SettingsTable poisson_settings() {
  SettingsTable t;
  t.defaults.model.family = glm::Family::poisson;
  t.defaults.model.min_history = 20;
  t.defaults.alert.alpha = 0.001;
  t.defaults.alert.episode_close_records = 3;
  return t;
}

}  // namespace

TEST_CASE("two spikes make one episode, three counts within bounds close it", "[engine][episodes]") {
  const SettingsTable settings = poisson_settings();
  Engine engine(settings);
  bounds::Rng rng(11);
  for (int d = 0; d < 40; ++d) REQUIRE(output_lines(engine.ingest(record("trap-a", d, rng.poisson(10.0)))).empty());

  // Far outside any bound of a mean-10 Poisson series (P(Y >= 200) is below 1e-100).
  std::vector<OutputLine> first = output_lines(engine.ingest(record("trap-a", 40, 200)));
  REQUIRE(first.size() == 1);
  CHECK(first[0].alert);
  CHECK_THAT(first[0].json, Catch::EndsWith(R"(,"episode":"trap-a/high/1","episode_state":"new"})"));
  CHECK_THAT(first[0].text, Catch::EndsWith(" [episode trap-a/high/1 new]"));
  std::vector<OutputLine> second = output_lines(engine.ingest(record("trap-a", 41, 200)));
  REQUIRE(second.size() == 1);
  CHECK_THAT(second[0].json, Catch::EndsWith(R"(,"episode":"trap-a/high/1","episode_state":"ongoing"})"));
  CHECK(engine.episodes().open_count() == 1);

  // Counts of 10 are inside the bounds of a mean-10 series, high or low.
  CHECK(output_lines(engine.ingest(record("trap-a", 42, 10))).empty());
  CHECK(output_lines(engine.ingest(record("trap-a", 43, 10))).empty());
  IngestResult third = engine.ingest(record("trap-a", 44, 10));
  REQUIRE(third.closed.size() == 1);
  std::vector<OutputLine> closing = output_lines(third);
  REQUIRE(closing.size() == 1);
  CHECK_FALSE(closing[0].alert);
  CHECK(closing[0].json ==
        R"({"episode_closed":"trap-a/high/1","series":"trap-a","direction":"high","opened":"2025-02-10T06:00:00Z",)"
        R"("last_alert":"2025-02-11T06:00:00Z","closed":"2025-02-14T06:00:00Z","alerts":2,"quiet_records":3})");
  CHECK(engine.episodes().open_count() == 0);
  CHECK(engine.episodes().totals().closed == 1);
}

TEST_CASE("alerts released by the control across series go through the episode tracker too", "[engine][episodes]") {
  const SettingsTable settings = poisson_settings();
  // One judged record per one-day step, so BH reduces to p <= q; q = 1e-6
  // keeps ordinary counts of a mean-10 series from alerting.
  const detect::FdrSpec fdr{true, 1e-6, Seconds{86400}};
  Engine engine(settings, {}, fdr);
  bounds::Rng rng(5);
  for (int d = 0; d < 40; ++d) engine.ingest(record("trap-a", d, rng.poisson(10.0)));
  IngestResult spike = engine.ingest(record("trap-a", 40, 200));
  CHECK_FALSE(spike.alert);
  CHECK(spike.closed.empty());
  // The next day's record closes day 40's step and brings its alert, stamped.
  IngestResult next = engine.ingest(record("trap-a", 41, 10));
  REQUIRE(next.released.size() == 1);
  REQUIRE(next.released[0].episode);
  CHECK(next.released[0].episode->id == "trap-a/high/1");
  std::vector<OutputLine> lines = output_lines(next);
  REQUIRE(lines.size() == 1);
  CHECK_THAT(lines[0].json, Catch::Contains(R"("detector":"bound_fdr")"));
  CHECK_THAT(lines[0].json, Catch::EndsWith(R"(,"episode":"trap-a/high/1","episode_state":"new"})"));
  // flush() stamps too. Day 41 and day 42 (its own decision still waiting)
  // are two quiet records, fewer than 3: day 42's alert continues the episode.
  engine.ingest(record("trap-a", 42, 200));
  std::vector<OutputLine> flushed = output_lines(engine.flush());
  REQUIRE(flushed.size() == 1);
  CHECK_THAT(flushed[0].json, Catch::EndsWith(R"(,"episode":"trap-a/high/1","episode_state":"ongoing"})"));
}
