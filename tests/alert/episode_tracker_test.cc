#include "alert/episode_tracker.h"

#include <catch2/catch.hpp>

#include "alert/alert_format.h"
#include "core/state_codec.h"

// The rule under test is the one issue 3 states: an alert opens an episode
// for its series and direction, further alerts continue it, a configured
// number of in-bound records closes it. The expected ids and times below are
// worked out by hand from that rule.

using namespace tallyd;

namespace {

TimePoint day(int d) { return parse_time("2025-03-01T06:00:00Z").value() + Seconds{d * 86400}; }

Alert alert(const std::string& series, int d, AlertSide side, const std::string& detector = "bound") {
  Alert a;
  a.series = series;
  a.time = day(d);
  a.side = side;
  a.detector = detector;
  return a;
}

// One judged record of `series` on day d raising `sides` (fed as alerts
// first, as the engine does); returns the closings.
struct Feed {
  EpisodeTracker tracker;
  std::uint32_t close_after = 3;
  std::vector<Alert> alerts;
  std::vector<EpisodeEnd> closed;
  std::vector<EpisodeEnd> record(const std::string& series, int d, std::vector<AlertSide> sides = {}) {
    for (AlertSide s : sides) {
      Alert a = alert(series, d, s);
      tracker.on_alert(a);
      alerts.push_back(a);
    }
    std::vector<EpisodeEnd> out;
    tracker.on_judged(series, day(d), sides, close_after, out);
    closed.insert(closed.end(), out.begin(), out.end());
    return out;
  }
};

}  // namespace

TEST_CASE("an alert opens an episode, later alerts continue it, N quiet records close it", "[alert][episodes]") {
  Feed f;
  f.record("trap-a", 0);  // quiet with nothing open: nothing happens
  CHECK(f.tracker.open_count() == 0);
  CHECK(f.record("trap-a", 1, {AlertSide::high}).empty());
  REQUIRE(f.alerts.back().episode);
  CHECK(f.alerts.back().episode->id == "trap-a/high/1");
  CHECK(f.alerts.back().episode->step == EpisodeStep::opened);
  CHECK(f.tracker.open_count() == 1);

  f.record("trap-a", 2);
  f.record("trap-a", 3);  // two quiet records: still open
  CHECK(f.record("trap-a", 4, {AlertSide::high}).empty());
  CHECK(f.alerts.back().episode->id == "trap-a/high/1");
  CHECK(f.alerts.back().episode->step == EpisodeStep::continued);

  // The alert on day 4 started the count again: days 5 and 6 do not close it, day 7 does.
  CHECK(f.record("trap-a", 5).empty());
  CHECK(f.record("trap-a", 6).empty());
  const std::vector<EpisodeEnd> closed = f.record("trap-a", 7);
  REQUIRE(closed.size() == 1);
  CHECK(closed[0].id == "trap-a/high/1");
  CHECK(closed[0].series == "trap-a");
  CHECK(closed[0].side == AlertSide::high);
  CHECK(closed[0].opened == day(1));
  CHECK(closed[0].last_alert == day(4));
  CHECK(closed[0].closed == day(7));
  CHECK(closed[0].alerts == 2);
  CHECK(closed[0].quiet_records == 3);
  CHECK(f.tracker.open_count() == 0);

  // The next alert opens episode 2 of that series and direction.
  f.record("trap-a", 8, {AlertSide::high});
  CHECK(f.alerts.back().episode->id == "trap-a/high/2");
  CHECK(f.alerts.back().episode->step == EpisodeStep::opened);
  CHECK(f.tracker.totals().opened == 2);
  CHECK(f.tracker.totals().closed == 1);
}

TEST_CASE("episodes of the two directions and of other series are independent", "[alert][episodes]") {
  Feed f;
  f.close_after = 2;
  f.record("trap-a", 0, {AlertSide::high});
  f.record("trap-b", 0, {AlertSide::high});
  CHECK(f.alerts[1].episode->id == "trap-b/high/1");
  // A low alert of trap-a opens its own episode, and is a quiet record for the high one.
  f.record("trap-a", 1, {AlertSide::low});
  CHECK(f.alerts.back().episode->id == "trap-a/low/1");
  CHECK(f.alerts.back().episode->step == EpisodeStep::opened);
  CHECK(f.tracker.open_count() == 3);
  // Records of trap-b never count for trap-a.
  f.record("trap-b", 1);
  f.record("trap-b", 2);  // closes trap-b/high/1
  REQUIRE(f.closed.size() == 1);
  CHECK(f.closed[0].id == "trap-b/high/1");
  // trap-a day 2: second quiet record for high (closes), first for low.
  const std::vector<EpisodeEnd> c = f.record("trap-a", 2);
  REQUIRE(c.size() == 1);
  CHECK(c[0].id == "trap-a/high/1");
  CHECK(f.tracker.open_id("trap-a", AlertSide::low) == "trap-a/low/1");
  CHECK(f.tracker.open_id("trap-a", AlertSide::high).empty());
  const std::vector<EpisodeEnd> c2 = f.record("trap-a", 3);
  REQUIRE(c2.size() == 1);
  CHECK(c2[0].id == "trap-a/low/1");
  CHECK(c2[0].side == AlertSide::low);
  CHECK(f.tracker.open_count() == 0);
}

TEST_CASE("a record alerting in both directions closes neither, close_after 1 closes at the next quiet record",
          "[alert][episodes]") {
  Feed f;
  f.close_after = 1;
  f.record("s", 0, {AlertSide::high, AlertSide::low});
  CHECK(f.tracker.open_count() == 2);
  const std::vector<EpisodeEnd> c = f.record("s", 1);
  REQUIRE(c.size() == 2);
  CHECK(c[0].side == AlertSide::high);  // high before low
  CHECK(c[1].side == AlertSide::low);
  CHECK(c[0].quiet_records == 1);
}

TEST_CASE("episode ids depend only on the sequence, and survive a save and restore", "[alert][episodes]") {
  // A fixed pseudo-random script (a linear congruential generator, constants of
  // Numerical Recipes, Press et al. 2007, ch. 7.1) of alerts and quiet records on three series.
  auto script = [](Feed& f, int from, int to) {
    std::uint32_t x = 12345;
    for (int d = 0; d < to; ++d) {
      for (const char* s : {"a", "b", "c"}) {
        x = x * 1664525u + 1013904223u;
        const std::uint32_t r = x >> 28;  // 0..15
        std::vector<AlertSide> sides;
        if (r < 3) sides.push_back(AlertSide::high);
        if (r == 3 || r == 4) sides.push_back(AlertSide::low);
        if (d >= from) f.record(s, d, sides);
      }
    }
  };
  Feed one, two;
  script(one, 0, 200);
  script(two, 0, 200);
  REQUIRE(one.alerts.size() > 50);
  REQUIRE(one.closed.size() > 10);
  REQUIRE(one.alerts.size() == two.alerts.size());
  for (std::size_t i = 0; i < one.alerts.size(); ++i) CHECK(alert_json(one.alerts[i]) == alert_json(two.alerts[i]));

  // Interrupted at day 120: saved, restored into a fresh tracker, continued.
  Feed first;
  script(first, 0, 120);
  StateWriter w;
  first.tracker.save_state(w);
  Feed resumed;
  StateReader r(w.text());
  resumed.tracker.load_state(r);
  REQUIRE_FALSE(r.failed());
  CHECK(r.at_end());
  CHECK(resumed.tracker.open_count() == first.tracker.open_count());
  CHECK(resumed.tracker.totals().opened == first.tracker.totals().opened);
  script(resumed, 120, 200);
  std::vector<std::string> whole, joined;
  for (const Alert& a : one.alerts) whole.push_back(alert_json(a));
  for (const EpisodeEnd& e : one.closed) whole.push_back(episode_end_json(e));
  for (const Alert& a : first.alerts) joined.push_back(alert_json(a));
  for (const Alert& a : resumed.alerts) joined.push_back(alert_json(a));
  for (const EpisodeEnd& e : first.closed) joined.push_back(episode_end_json(e));
  for (const EpisodeEnd& e : resumed.closed) joined.push_back(episode_end_json(e));
  CHECK(joined == whole);
  CHECK(resumed.tracker.totals().closed == one.tracker.totals().closed);
}

TEST_CASE("a damaged episode section is refused by the reader", "[alert][episodes]") {
  EpisodeTracker t;
  StateReader bad_side(R"(episodes 1 0 1
episode 1:s 8:sideways 1 1 0 0 1 0
)");
  t.load_state(bad_side);
  REQUIRE(bad_side.failed());
  CHECK_THAT(bad_side.error(), Catch::Contains("sideways"));

  StateReader good("episodes 1 0 1\nepisode 1:s 4:high 1 1 100 100 1 2\n");
  t.load_state(good);
  REQUIRE_FALSE(good.failed());
  CHECK(t.open_count() == 1);
  CHECK(t.open_id("s", AlertSide::high) == "s/high/1");
}

TEST_CASE("alert lines keep the old keys as a prefix and append the episode", "[alert][episodes]") {
  Alert a = alert("trap \"x\"", 0, AlertSide::low, "low_run");
  const std::string before = alert_json(a);
  EpisodeTracker t;
  t.on_alert(a);
  const std::string after = alert_json(a);
  REQUIRE(before.back() == '}');
  CHECK(after.substr(0, before.size() - 1) == before.substr(0, before.size() - 1));
  CHECK(after.substr(before.size() - 1) == R"(,"episode":"trap \"x\"/low/1","episode_state":"new"})");
  CHECK_THAT(alert_text(a), Catch::EndsWith(" [episode trap \"x\"/low/1 new]"));

  EpisodeEnd e{"s/high/4", "s", AlertSide::high, day(0), day(2), day(5), 3, 3};
  CHECK(episode_end_json(e) ==
        R"({"episode_closed":"s/high/4","series":"s","direction":"high","opened":"2025-03-01T06:00:00Z",)"
        R"("last_alert":"2025-03-03T06:00:00Z","closed":"2025-03-06T06:00:00Z","alerts":3,"quiet_records":3})");
  CHECK(episode_end_text(e) ==
        "2025-03-06T06:00:00Z s HIGH episode s/high/4 closed: 3 alerts from 2025-03-01T06:00:00Z to "
        "2025-03-03T06:00:00Z, then 3 records with no high alert");
}
