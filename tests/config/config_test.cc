#include "config/config.h"

#include <catch2/catch.hpp>

using namespace tallyd;

TEST_CASE("a full config fills defaults and per-series rules", "[config]") {
  const char* text = R"(
[model]
family = "negbin"
link = "sqrt"
trend = true
covariates = ["temperature_c"]
window = { span = "3y", records = 300 }
min_history = 25
refit_every = 2

[[model.seasons]]
period = "1y"
harmonics = 2

[alert]
alpha = 0.005
direction = "high"
method = "simulate"
draws = 20000
seed = 99

[limits]
max_series = 500

[[series]]
match = "orchard-s*"
model.family = "poisson"
alert.alpha = 0.0005
)";
  auto c = parse_config(text, "monitor.toml");
  REQUIRE(c.ok());
  const SeriesSettings& d = c->settings.defaults;
  CHECK(d.model.family == glm::Family::negbin);
  CHECK(d.model.link == glm::Link::sqrt);
  CHECK(d.model.trend);
  CHECK(d.model.covariates == std::vector<std::string>{"temperature_c"});
  CHECK(d.model.window.span == Seconds{3 * 31557600});
  CHECK(d.model.window.records == 300u);
  CHECK(d.model.min_history == 25u);
  CHECK(d.model.refit_every == 2u);
  REQUIRE(d.model.seasons.size() == 1);
  CHECK(d.model.seasons[0].harmonics == 2);
  CHECK(d.alert.alpha == 0.005);
  CHECK(d.alert.direction == Direction::high);
  CHECK(d.alert.method == bounds::Method::simulate);
  CHECK(d.alert.draws == 20000);
  CHECK(d.alert.seed == 99u);
  CHECK(c->limits.max_series == 500u);

  const SeriesSettings& s = c->settings.for_series("orchard-s04");
  CHECK(s.model.family == glm::Family::poisson);
  CHECK(s.model.link == glm::Link::sqrt);  // inherited from [model]
  CHECK(s.alert.alpha == 0.0005);
  CHECK(c->settings.for_series("orchard-n04").model.family == glm::Family::negbin);
}

TEST_CASE("window accepts a duration or a record count", "[config]") {
  auto a = parse_config("[model]\nwindow = \"90d\"\n", "a.toml");
  REQUIRE(a.ok());
  CHECK(a->settings.defaults.model.window.span == Seconds{90 * 86400});
  CHECK_FALSE(a->settings.defaults.model.window.records.has_value());
  auto b = parse_config("[model]\nwindow = 156\n", "b.toml");
  REQUIRE(b.ok());
  CHECK(b->settings.defaults.model.window.records == 156u);
  CHECK_FALSE(b->settings.defaults.model.window.span.has_value());
}

TEST_CASE("every config error names the file, the line and the key", "[config]") {
  struct Case {
    const char* text;
    const char* expected;
  };
  const Case cases[] = {
      {"[model]\nfamily = \"poison\"\n", "monitor.toml:2: model.family: 'poison' is not one of"},
      {"[model]\nlink = \"logit\"\n", "monitor.toml:2: model.link: 'logit' is not one of"},
      {"[alert]\n\nalpha = 1.5\n", "monitor.toml:3: alert.alpha: must be a number between 0 and 0.5"},
      {"[alert]\ndirection = \"up\"\n", "monitor.toml:2: alert.direction:"},
      {"[model]\nfamliy = \"poisson\"\n", "monitor.toml:2: model.famliy: unknown key"},
      {"[model]\nwindow = \"3 years\"\n", "monitor.toml:2: model.window: duration '3 years'"},
      {"[[model.seasons]]\nperiod = \"1y\"\nharmonics = 0\n", "monitor.toml:3: model.seasons.harmonics: must be"},
      {"[[series]]\nmodel.family = \"negbin\"\n", "monitor.toml:1: series[0].match: is required"},
      {"[model]\ncovariates = [\"count\"]\n", "monitor.toml:2: model.covariates: 'count' is a reserved column"},
      {"[model\nfamily = 1\n", "monitor.toml:1:"},
      {"[model]\ntrend = \"yes\"\n", "monitor.toml:2: model.trend: must be true or false"},
      {"[model]\nalerted_weight = 2\n", "monitor.toml:2: model.alerted_weight: must be a number between 0 and 1"},
      {"[model]\ncadence_from = -1\n", "monitor.toml:2: model.cadence_from: must be between 0 and 1000000"},
      {"[model]\ndoubt_factor = 0.5\n", "monitor.toml:2: model.doubt_factor: must be a number between 1 and 1000000"},
      {"[model]\nlink = \"sqrt\"\nstep_between_refits = true\n", "monitor.toml:3: model.step_between_refits: needs link = \"log\""},
      {"[detect]\nshift_factor = 1\n", "monitor.toml:2: detect.shift_factor: must be a number above 1"},
      {"[detect]\nlow_run_alpha = 0\n", "monitor.toml:2: detect.low_run_alpha: must be"},
      {"[detect]\nshfit = true\n", "monitor.toml:2: detect.shfit: unknown key"},
      {"[detect]\nshift_error = \"kept\"\n", "monitor.toml:2: detect.shift_error: 'kept' is not one of fresh, held"},
  };
  for (const Case& c : cases) {
    auto r = parse_config(c.text, "monitor.toml");
    INFO(c.text);
    REQUIRE_FALSE(r.ok());
    CHECK_THAT(r.error().message, Catch::Contains(c.expected));
  }
}

TEST_CASE("detector and resistant-training keys", "[config]") {
  const char* text = R"(
[model]
reweight = false
reweight_threshold = 3
reweight_rounds = 4
reweight_mean_correction = true
alerted_weight = 0.25
guard_records = 3
cadence_from = 90
doubt_factor = 40
step_between_refits = true
[detect]
shift = true
shift_factor = 1.5
shift_arl_records = 1000
shift_error = "held"
low_run = true
low_run_quantile = 0.2
low_run_alpha = 0.0005
[[series]]
match = "sensor-*"
detect.shift = false
)";
  auto r = parse_config(text, "monitor.toml");
  REQUIRE(r.ok());
  const SeriesSettings& d = r.value().settings.defaults;
  CHECK_FALSE(d.model.reweight);
  CHECK(d.model.reweight_threshold == 3);
  CHECK(d.model.reweight_rounds == 4);
  CHECK(d.model.reweight_mean_correction);
  CHECK(d.model.alerted_weight == 0.25);
  CHECK(d.model.guard_records == 3);
  CHECK(d.model.cadence_from == 90);
  CHECK(d.model.doubt_factor == 40);
  CHECK(d.model.step_between_refits);
  CHECK(d.detect.shift);
  CHECK(d.detect.shift_factor == 1.5);
  CHECK(d.detect.shift_arl_records == 1000);
  CHECK(d.detect.shift_error == ShiftError::held);
  CHECK(d.detect.low_run);
  CHECK(d.detect.low_run_quantile == 0.2);
  CHECK(d.detect.low_run_alpha == 0.0005);
  const SeriesSettings& sensor = r.value().settings.for_series("sensor-2");
  CHECK_FALSE(sensor.detect.shift);
  CHECK(sensor.detect.low_run);  // inherited from the defaults
  // Defaults when nothing is set.
  auto empty = parse_config("", "empty.toml");
  REQUIRE(empty.ok());
  CHECK(empty.value().settings.defaults.model.reweight);
  CHECK(empty.value().settings.defaults.model.reweight_rounds == 1);
  CHECK_FALSE(empty.value().settings.defaults.detect.shift);
  auto zero = parse_config("[model]\nreweight_rounds = 0\n", "monitor.toml");
  REQUIRE_FALSE(zero.ok());
  CHECK_THAT(zero.error().message, Catch::Contains("model.reweight_rounds") && Catch::Contains("between 1 and 10"));
}

TEST_CASE("a missing config file is an error naming it", "[config]") {
  auto r = load_config("/nonexistent/monitor.toml");
  REQUIRE_FALSE(r.ok());
  CHECK_THAT(r.error().message, Catch::StartsWith("/nonexistent/monitor.toml: cannot open"));
}

TEST_CASE("late, duplicate and silence keys", "[config]") {
  const char* text = R"(
[arrival]
late_tolerance = "2d"
duplicates = "replace"
max_held = 5000

[detect]
silence = true
silence_multiple = 4.5
silence_min_gaps = 6
silence_window = 21

[intake]
clock = "wall"

[[series]]
match = "sensor-*"
detect.silence = false
)";
  auto r = parse_config(text, "monitor.toml");
  REQUIRE(r.ok());
  CHECK(r->limits.arrival.late_tolerance == Seconds{2 * 86400});
  CHECK(r->limits.arrival.duplicates == DuplicatePolicy::replace);
  CHECK(r->limits.arrival.max_held == 5000);
  const DetectSpec& d = r->settings.defaults.detect;
  CHECK(d.silence);
  CHECK(d.silence_multiple == 4.5);
  CHECK(d.silence_min_gaps == 6);
  CHECK(d.silence_window == 21);
  CHECK_FALSE(r->settings.for_series("sensor-1").detect.silence);
  CHECK(r->service.wall_clock);

  auto defaults = parse_config("", "empty.toml");
  REQUIRE(defaults.ok());
  CHECK(defaults->limits.arrival.late_tolerance == Seconds{0});
  CHECK(defaults->limits.arrival.duplicates == DuplicatePolicy::refuse);
  CHECK_FALSE(defaults->settings.defaults.detect.silence);
  CHECK_FALSE(defaults->service.wall_clock);
  auto zero = parse_config("[arrival]\nlate_tolerance = \"0s\"\n", "z.toml");
  REQUIRE(zero.ok());
  CHECK(zero->limits.arrival.late_tolerance == Seconds{0});

  struct Bad {
    const char* text;
    const char* message;
  };
  for (const Bad& b : {
           Bad{"[arrival]\nlate_tolerance = \"soon\"\n", "m.toml:2: arrival.late_tolerance: "},
           Bad{"[arrival]\nlate_tolerance = \"400d\"\n", "m.toml:2: arrival.late_tolerance: must be at most 366d"},
           Bad{"[arrival]\nduplicates = \"keep\"\n", "m.toml:2: arrival.duplicates: 'keep' is not one of refuse, replace"},
           Bad{"[arrival]\nduplicates = \"replace\"\n", "m.toml:2: arrival.duplicates: \"replace\" needs"},
           Bad{"[arrival]\nmax_held = 0\n", "m.toml:2: arrival.max_held: must be from 1"},
           Bad{"[arrival]\nlate = \"1d\"\n", "m.toml:2: arrival.late: unknown key"},
           Bad{"[detect]\nsilence_multiple = 1\n", "m.toml:2: detect.silence_multiple: must be a number above 1"},
           Bad{"[detect]\nsilence_min_gaps = 1\n", "m.toml:2: detect.silence_min_gaps: must be an integer from 2"},
           Bad{"[detect]\nsilence_min_gaps = 10\nsilence_window = 8\n",
               "detect.silence_window: (8) must be at least silence_min_gaps (10)"},
           Bad{"[intake]\nclock = \"sun\"\n", "m.toml:2: intake.clock: 'sun' is not one of data, wall"},
       }) {
    auto bad = parse_config(b.text, "m.toml");
    INFO(b.text);
    REQUIRE_FALSE(bad.ok());
    CHECK_THAT(bad.error().message, Catch::Contains(b.message));
  }
}

TEST_CASE("episode and step-release keys: defaults, overrides, errors", "[config]") {
  auto empty = parse_config("", "empty.toml");
  REQUIRE(empty.ok());
  CHECK(empty.value().settings.defaults.alert.episode_close_records == 3);
  CHECK(empty.value().fdr.release_delay == Seconds{86400});
  CHECK(empty.value().fdr.release_idle == Seconds{60});

  auto r = parse_config(R"(
[alert]
episode_close_records = 5
[fdr]
release_delay = "12h"
release_idle = "30s"
[[series]]
match = "weekly-*"
alert.episode_close_records = 2
)",
                        "monitor.toml");
  REQUIRE(r.ok());
  CHECK(r.value().settings.defaults.alert.episode_close_records == 5);
  CHECK(r.value().settings.for_series("weekly-3").alert.episode_close_records == 2);
  CHECK(r.value().settings.for_series("daily-3").alert.episode_close_records == 5);
  CHECK(r.value().fdr.release_delay == Seconds{12 * 3600});
  CHECK(r.value().fdr.release_idle == Seconds{30});

  const std::pair<const char*, const char*> bad[] = {
      {"[alert]\nepisode_close_records = 0\n", "monitor.toml:2: alert.episode_close_records: must be between 1 and 10000"},
      {"[alert]\nepisode_close_records = \"3\"\n", "monitor.toml:2: alert.episode_close_records: must be an integer"},
      {"[fdr]\nrelease_idle = \"45d\"\n", "monitor.toml:2: fdr.release_idle: must be from 1s to 30d"},
      {"[fdr]\nrelease_delay = \"soon\"\n", "monitor.toml:2: fdr.release_delay: duration 'soon'"},
  };
  for (const auto& [text, expected] : bad) {
    auto e = parse_config(text, "monitor.toml");
    INFO(text);
    REQUIRE_FALSE(e.ok());
    CHECK_THAT(e.error().message, Catch::Contains(expected));
  }
}

TEST_CASE("alert.grid_node_limit: default, override, the earlier rule, errors", "[config]") {
  auto empty = parse_config("", "empty.toml");
  REQUIRE(empty.ok());
  CHECK(empty.value().settings.defaults.alert.grid_node_limit == bounds::kDefaultGridNodeLimit);
  auto r = parse_config("[alert]\ngrid_node_limit = 0\n[[series]]\nmatch = \"big-*\"\nalert.grid_node_limit = 8192\n",
                        "monitor.toml");
  REQUIRE(r.ok());
  CHECK(r.value().settings.defaults.alert.grid_node_limit == 0);
  CHECK(r.value().settings.for_series("big-1").alert.grid_node_limit == 8192);
  for (const char* text : {"[alert]\ngrid_node_limit = 63\n", "[alert]\ngrid_node_limit = 16385\n"}) {
    auto e = parse_config(text, "monitor.toml");
    INFO(text);
    REQUIRE_FALSE(e.ok());
    CHECK_THAT(e.error().message,
               Catch::Contains("monitor.toml:2: alert.grid_node_limit: must be 0 or between 64 and 16384"));
  }
}
