// Benjamini-Hochberg across series, per time step.
#include "detect/fdr.h"

#include <cmath>

#include <catch2/catch.hpp>

#include "bounds/random.h"
#include "engine/engine.h"

using namespace tallyd;
using namespace tallyd::detect;

TEST_CASE("BH on the published example rejects the four smallest at q = 0.05", "[detect]") {
  // The 15 p-values of the worked example in Benjamini and Hochberg (1995),
  // section 4 (values from memory): BH at 0.05 rejects 4 hypotheses, while
  // Bonferroni (0.05 / 15 = 0.0033) rejects 3.
  const std::vector<double> p = {0.0001, 0.0004, 0.0019, 0.0095, 0.0201, 0.0278, 0.0298, 0.0344,
                                 0.0459, 0.3240, 0.4262, 0.5719, 0.6528, 0.7590, 1.0000};
  const std::vector<double> adj = bh_adjust(p);
  int rejected = 0;
  for (double a : adj) rejected += a <= 0.05 ? 1 : 0;
  CHECK(rejected == 4);
  // Adjusted values by the step-up definition: min over j >= i of m p_(j) / j.
  CHECK(adj[3] == Approx(15 * 0.0095 / 4));
  CHECK(adj[4] == Approx(15 * 0.0201 / 5));
  CHECK(adj[7] == Approx(15 * 0.0344 / 8));
  CHECK(adj[14] == 1.0);
  // Input order does not matter.
  std::vector<double> rev(p.rbegin(), p.rend());
  const std::vector<double> adj_rev = bh_adjust(rev);
  for (std::size_t i = 0; i < p.size(); ++i) CHECK(adj_rev[p.size() - 1 - i] == adj[i]);
}

TEST_CASE("BH across 50 series: with no signal, steps with any alert stay at or below q", "[detect]") {
  // Under the complete null, BH's false discovery rate equals the chance of
  // any rejection and is q for independent uniform p-values (Benjamini and
  // Hochberg 1995, theorem 1). 4000 steps: 3 binomial standard errors.
  FdrSpec spec;
  spec.enabled = true;
  spec.rate = 0.05;
  FdrState state;
  bounds::Rng rng(17);
  const int steps = 4000;
  int steps_with_alerts = 0;
  std::int64_t last_step = -1;
  auto count = [&](const std::vector<Alert>& out) {
    if (out.empty()) return;
    const std::int64_t s = step_of(out.front().time, spec.step);
    if (s != last_step) ++steps_with_alerts;
    last_step = s;
  };
  for (int w = 0; w < steps; ++w) {
    for (int s = 0; s < 50; ++s) {
      FdrCandidate c;
      c.alert.time = TimePoint{Seconds{static_cast<std::int64_t>(w) * 7 * 86400 + s * 60}};
      c.alert.series = "s" + std::to_string(s);
      c.alert.p_value = rng.uniform();
      count(fdr_offer(state, spec, c, 50));
    }
  }
  count(fdr_close(state, spec));
  const double rate = static_cast<double>(steps_with_alerts) / steps;
  INFO("steps with an alert: " << rate);
  CHECK(rate <= 0.05 + 3 * std::sqrt(0.05 * 0.95 / steps));
  CHECK(rate >= 0.05 - 3 * std::sqrt(0.05 * 0.95 / steps));
}

TEST_CASE("engine with control across series: decisions wait for the step to close", "[detect][engine]") {
  SettingsTable settings;
  settings.defaults.model.family = glm::Family::poisson;
  settings.defaults.model.min_history = 10;
  settings.defaults.alert.direction = Direction::high;
  FdrSpec fdr;
  fdr.enabled = true;
  fdr.rate = 0.01;
  fdr.step = Seconds{86400};
  Engine engine(settings, {}, fdr);
  bounds::Rng rng(4);
  const std::int64_t day0 = 1700006400;  // a UTC midnight: 1700006400 / 86400 = 19676
  auto obs = [&](const std::string& id, int day, std::int64_t count) {
    Observation o;
    o.series = id;
    o.time = TimePoint{Seconds{day0 + static_cast<std::int64_t>(day) * 86400 + 3600}};
    o.count = count;
    return o;
  };
  for (int d = 0; d < 30; ++d)
    for (const char* id : {"a", "b", "c"}) CHECK(engine.ingest(obs(id, d, rng.poisson(10))).released.empty());
  // Day 30: a spike in "b"; nothing is decided during the day.
  IngestResult a = engine.ingest(obs("a", 30, 10));
  IngestResult b = engine.ingest(obs("b", 30, 80));
  CHECK_FALSE(b.alert);
  CHECK(b.released.empty());
  CHECK(engine.fdr_state().pending.size() == 2);
  // The first record of day 31 closes day 30 and releases the spike.
  IngestResult next = engine.ingest(obs("c", 31, 10));
  REQUIRE(next.released.size() == 1);
  CHECK(next.released[0].series == "b");
  CHECK(next.released[0].detector == "bound_fdr");
  CHECK(next.released[0].statistic <= 0.01);
  CHECK(engine.counters().alerts_fdr == 1);
  // Day 31 is still open: flush closes it (a normal count: no alert).
  CHECK(engine.flush().empty());
  CHECK_FALSE(engine.fdr_state().open_step);
}

TEST_CASE("a late record of a closed step is decided alone, conservatively", "[detect]") {
  FdrSpec spec;
  spec.enabled = true;
  spec.rate = 0.05;
  FdrState state;
  FdrCandidate c;
  c.alert.time = TimePoint{Seconds{10 * 7 * 86400}};
  c.alert.p_value = 0.5;
  fdr_offer(state, spec, c, 10);
  fdr_close(state, spec);
  FdrCandidate late = c;
  late.alert.time = TimePoint{Seconds{9 * 7 * 86400}};
  late.alert.p_value = 0.004;  // <= 0.05 / 10
  const std::vector<Alert> out = fdr_offer(state, spec, late, 10);
  REQUIRE(out.size() == 1);
  CHECK(out[0].alpha == Approx(0.005));
  late.alert.p_value = 0.006;
  CHECK(fdr_offer(state, spec, late, 10).empty());
  CHECK(state.pending.empty());
}
