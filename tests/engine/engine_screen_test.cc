#include "engine/engine.h"

#include <string>
#include <vector>

#include <catch2/catch.hpp>

#include "alert/alert_format.h"
#include "bounds/random.h"

using namespace tallyd;

namespace {

// `series` daily series over `days` days, negative binomial counts (size 4) around a
// weekly cycle, with spikes and dips so that alerts occur.
std::vector<Observation> screen_feed(int series = 40, int days = 160) {
  std::vector<Observation> feed;
  bounds::Rng rng(77);
  const TimePoint start = parse_time("2025-01-01T06:00:00Z").value();
  for (int d = 0; d < days; ++d) {
    for (int s = 0; s < series; ++s) {
      Observation o;
      o.series = "trap-" + std::to_string(s);
      o.time = start + Seconds{static_cast<std::int64_t>(d) * 86400};
      o.exposure = 0.5 + rng.uniform();
      const double mu = o.exposure * (2.0 + s) * std::exp(0.3 * std::sin(2 * M_PI * d / 7.0));
      o.count = rng.negbin(mu, 4.0);
      if (d % 37 == 11 && s % 5 == 0) o.count = 4 * o.count + 15;
      if (d % 41 == 20 && s % 6 == 1) o.count = 0;
      feed.push_back(o);
    }
  }
  return feed;
}

SettingsTable screen_settings(bounds::Method method, bool screen, bool shift) {
  SettingsTable t;
  ModelSpec& m = t.defaults.model;
  m.family = glm::Family::quasipoisson;
  m.seasons = {Season{Seconds{7 * 86400}, 1}};
  m.window = Window{std::nullopt, std::size_t{90}};
  m.min_history = 20;
  t.defaults.alert.method = method;
  t.defaults.alert.draws = 2000;
  t.defaults.alert.alpha = 0.005;
  t.defaults.alert.screen = screen;
  t.defaults.detect.shift = shift;
  return t;
}

struct Run {
  std::vector<std::string> alerts;  // every alert line, in order
  int screened = 0;
  int judged = 0;
};

Run run(const std::vector<Observation>& feed, const SettingsTable& settings, bool full_bounds = false) {
  Engine engine(settings);
  engine.keep_full_bounds(full_bounds);
  Run out;
  for (const Observation& o : feed) {
    const IngestResult r = engine.ingest(o);
    if (r.prediction) {
      ++out.judged;
      out.screened += r.prediction->bounds.screened;
    }
    if (r.alert) out.alerts.push_back(alert_json(*r.alert));
    for (const Alert& a : r.detector_alerts) out.alerts.push_back(alert_json(a));
  }
  return out;
}

}  // namespace

// The screen is a speed switch with error bound zero for quadrature: the
// alert lines (bounds and p-values included) must be byte-identical.
TEST_CASE("engine screen: quadrature alerts are identical with the screen on and off", "[engine][screen]") {
  for (bool shift : {false, true}) {
    // The shift CUSUM's limits cost more per record: a smaller feed for it.
    const std::vector<Observation> feed = shift ? screen_feed(5, 110) : screen_feed();
    const SettingsTable off = screen_settings(bounds::Method::quadrature, false, shift);
    const SettingsTable on = screen_settings(bounds::Method::quadrature, true, shift);
    const Run a = run(feed, off);
    const Run b = run(feed, on);
    CHECK(a.screened == 0);
    CHECK(b.screened > b.judged / 2);  // the screen does settle most records
    REQUIRE(a.alerts.size() > 2);
    CHECK(a.alerts == b.alerts);
  }
}

TEST_CASE("engine screen: simulate alerts are identical on a generated feed", "[engine][screen]") {
  // The bound allows a change with probability <= 2e-12 per record
  // (bounds/screen.h), so on 5,000 judged records none is expected.
  std::vector<Observation> feed = screen_feed();
  feed.resize(40 * 90);
  const SettingsTable off = screen_settings(bounds::Method::simulate, false, false);
  const SettingsTable on = screen_settings(bounds::Method::simulate, true, false);
  const Run a = run(feed, off);
  const Run b = run(feed, on);
  CHECK(b.screened > b.judged / 3);
  REQUIRE(a.alerts.size() > 5);
  CHECK(a.alerts == b.alerts);
}

TEST_CASE("engine screen: keep_full_bounds and simulate with the shift CUSUM turn it off", "[engine][screen]") {
  std::vector<Observation> feed = screen_feed();
  feed.resize(40 * 60);
  CHECK(run(feed, screen_settings(bounds::Method::quadrature, true, false), true).screened == 0);
  // The simulated shift CUSUM is slow per record: a small feed.
  const Run shift = run(screen_feed(3, 40), screen_settings(bounds::Method::simulate, true, true));
  CHECK(shift.judged > 30);
  CHECK(shift.screened == 0);
}
