#include "engine/engine.h"

#include <catch2/catch.hpp>

#include "bounds/random.h"

using namespace tallyd;

namespace {

Observation record(const std::string& series, std::int64_t day, std::int64_t count, double exposure = 1.0) {
  Observation o;
  o.time = parse_time("2025-01-01T06:00:00Z").value() + Seconds{day * 86400};
  o.series = series;
  o.count = count;
  o.exposure = exposure;
  o.where = SourcePos{"test", static_cast<std::uint64_t>(day + 2)};
  return o;
}

SettingsTable poisson_settings() {
  SettingsTable t;
  t.defaults.model.family = glm::Family::poisson;
  t.defaults.model.min_history = 20;
  t.defaults.alert.alpha = 0.001;
  return t;
}

}  // namespace

TEST_CASE("a record is judged against the model before it learns the record", "[engine]") {
  // Habit 1 of STYLE.md: a spike of 500 must not widen its own interval.
  SettingsTable settings = poisson_settings();
  Engine engine(settings);
  bounds::Rng rng(7);
  for (int d = 0; d < 60; ++d) engine.ingest(record("trap-a", d, rng.poisson(10.0)));

  const Observation spike = record("trap-a", 60, 500);
  const SeriesModel* model = engine.find("trap-a");
  REQUIRE(model != nullptr);
  REQUIRE(model->ready());
  const Prediction before = model->predict(spike);

  IngestResult r = engine.ingest(spike);
  REQUIRE(r.kind == IngestResult::Kind::judged);
  REQUIRE(r.alert.has_value());
  CHECK(r.alert->side == AlertSide::high);
  CHECK(r.alert->upper == before.bounds.upper);
  CHECK(r.alert->upper < 30);  // the bound of a mean-10 series, not one stretched by the spike
  CHECK(r.alert->p_value == before.bounds.p_high);
  CHECK(r.alert->p_value < 1e-100);

  // After learning the spike the model has moved: the next prediction differs.
  const Prediction after = model->predict(record("trap-a", 61, 10));
  CHECK(after.bounds.expected > before.bounds.expected);
}

TEST_CASE("warming up: no judgement before min_history records", "[engine]") {
  SettingsTable settings = poisson_settings();
  Engine engine(settings);
  for (int d = 0; d < 19; ++d) CHECK(engine.ingest(record("s", d, 5 + d % 3)).kind == IngestResult::Kind::warming_up);
  CHECK(engine.ingest(record("s", 19, 6)).kind == IngestResult::Kind::warming_up);  // the 20th record triggers the first fit
  CHECK(engine.ingest(record("s", 20, 6)).kind == IngestResult::Kind::judged);
  CHECK(engine.counters().warming_up == 20);
  CHECK(engine.counters().judged == 1);
}

TEST_CASE("refusals are counted, explained, and do not disturb the series", "[engine]") {
  SettingsTable settings = poisson_settings();
  settings.defaults.model.covariates = {"temperature_c"};
  Engine engine(settings);
  auto with_temp = [](Observation o, double t) {
    o.covariates.push_back(Covariate{"temperature_c", t});
    return o;
  };
  REQUIRE(engine.ingest(with_temp(record("s", 0, 4), 12.0)).kind == IngestResult::Kind::warming_up);

  IngestResult late = engine.ingest(with_temp(record("s", 0, 4), 12.0));
  REQUIRE(late.kind == IngestResult::Kind::rejected);
  CHECK(late.rejection->reason == RejectReason::out_of_order);
  CHECK_THAT(late.rejection->describe(), Catch::Contains("test:2: out_of_order: time 2025-01-01T06:00:00Z is not after"));

  IngestResult no_temp = engine.ingest(record("s", 1, 4));
  REQUIRE(no_temp.kind == IngestResult::Kind::rejected);
  CHECK(no_temp.rejection->reason == RejectReason::missing_covariate);
  CHECK_THAT(no_temp.rejection->detail, Catch::Contains("needs covariate 'temperature_c'"));

  IngestResult zero = engine.ingest(with_temp(record("s", 2, 0, 0.0), 11.0));
  REQUIRE(zero.kind == IngestResult::Kind::rejected);
  CHECK(zero.rejection->reason == RejectReason::zero_exposure);

  // The next valid record is accepted and the series holds exactly the two valid ones.
  CHECK(engine.ingest(with_temp(record("s", 3, 5), 13.0)).kind == IngestResult::Kind::warming_up);
  CHECK(engine.find("s")->history_size() == 2);
  CHECK(engine.counters().rejected.total() == 3);
  CHECK(engine.counters().rejected[RejectReason::out_of_order] == 1);
}

TEST_CASE("new series beyond the series limit are refused, known ones still accepted", "[engine]") {
  SettingsTable settings = poisson_settings();
  Engine engine(settings, EngineLimits{2});
  CHECK(engine.ingest(record("a", 0, 1)).kind != IngestResult::Kind::rejected);
  CHECK(engine.ingest(record("b", 0, 1)).kind != IngestResult::Kind::rejected);
  IngestResult c = engine.ingest(record("c", 0, 1));
  REQUIRE(c.kind == IngestResult::Kind::rejected);
  CHECK(c.rejection->reason == RejectReason::too_many_series);
  CHECK(engine.ingest(record("a", 1, 1)).kind != IngestResult::Kind::rejected);
  CHECK(engine.series_count() == 2);
}

TEST_CASE("a low count against a busy series raises a low alert", "[engine]") {
  SettingsTable settings = poisson_settings();
  Engine engine(settings);
  bounds::Rng rng(11);
  for (int d = 0; d < 40; ++d) engine.ingest(record("busy", d, rng.poisson(40.0)));
  IngestResult r = engine.ingest(record("busy", 40, 3));
  REQUIRE(r.alert.has_value());
  CHECK(r.alert->side == AlertSide::low);
  CHECK(r.alert->lower > 3);
  settings.defaults.alert.direction = Direction::high;  // the series keeps a pointer to these settings
  CHECK_FALSE(engine.ingest(record("busy", 41, 2)).alert.has_value());
}
