#include "engine/arrival_hold.h"

#include <catch2/catch.hpp>

#include <string>
#include <vector>

#include "alert/alert_format.h"
#include "bounds/random.h"
#include "core/state_codec.h"
#include "engine/engine.h"

using namespace tallyd;

namespace {

constexpr std::int64_t kDay = 86400;

Observation at(const std::string& series, std::int64_t seconds, std::int64_t count) {
  Observation o;
  o.time = parse_time("2025-03-01T00:00:00Z").value() + Seconds{seconds};
  o.series = series;
  o.count = count;
  o.where = SourcePos{"test", static_cast<std::uint64_t>(seconds / 3600 + 1)};
  return o;
}

SettingsTable poisson_settings() {
  SettingsTable t;
  t.defaults.model.family = glm::Family::poisson;
  t.defaults.model.min_history = 20;
  t.defaults.alert.alpha = 0.01;
  return t;
}

// Every alert line an offer result carries, in the order replay writes them.
void lines_of(const OfferResult& o, std::string& out, std::vector<Observation>* judged = nullptr) {
  for (const Released& rel : o.released) {
    for (const Alert& a : rel.silence) out += alert_json(a) + "\n";
    if (rel.result.rejection) continue;
    if (judged) judged->push_back(rel.record);
    if (rel.result.recovery) out += alert_json(*rel.result.recovery) + "\n";
    if (rel.result.alert) out += alert_json(*rel.result.alert) + "\n";
    for (const Alert& a : rel.result.detector_alerts) out += alert_json(a) + "\n";
  }
  for (const Alert& a : o.silence) out += alert_json(a) + "\n";
}

// Two daily series with a few spikes and dips, in time order. Seeded, so the
// same every run; the counts are invented.
std::vector<Observation> two_series() {
  bounds::Rng rng(11);
  std::vector<Observation> out;
  for (std::int64_t d = 0; d < 90; ++d) {
    std::int64_t a = rng.poisson(12.0), b = rng.poisson(30.0);
    if (d == 40 || d == 71) a = 60;
    if (d == 55) b = 2;
    out.push_back(at("trap-a", d * kDay, a));
    out.push_back(at("trap-b", d * kDay + 3600, b));
  }
  return out;
}

}  // namespace

TEST_CASE("arrival hold: with no tolerance every record passes straight through", "[engine][arrival]") {
  ArrivalHold hold;
  CHECK_FALSE(hold.active());
  std::vector<Observation> ready;
  std::optional<Rejection> why;
  CHECK(hold.offer(at("s", kDay, 3), ready, why) == ArrivalHold::Verdict::passed);
  CHECK(hold.offer(at("s", 0, 4), ready, why) == ArrivalHold::Verdict::passed);  // older: the engine decides
  CHECK(ready.size() == 2);
  CHECK_FALSE(why);
  CHECK(hold.held_count() == 0);

  // Through the engine the older record is the engine's out_of_order, as without the hold.
  SettingsTable settings = poisson_settings();
  Engine engine(settings);
  engine.offer(at("s", kDay, 3));
  OfferResult late = engine.offer(at("s", 0, 4));
  REQUIRE(late.released.size() == 1);
  REQUIRE(late.released[0].result.rejection);
  CHECK(late.released[0].result.rejection->reason == RejectReason::out_of_order);
  CHECK(engine.counters().rejected[RejectReason::out_of_order] == 1);
}

TEST_CASE("arrival hold: records are released once the data clock passes time + tolerance", "[engine][arrival]") {
  ArrivalHold hold(ArrivalSpec{Seconds{2 * kDay}});
  std::vector<Observation> ready;
  std::optional<Rejection> why;
  CHECK(hold.offer(at("a", 0, 1), ready, why) == ArrivalHold::Verdict::held);
  CHECK(hold.offer(at("b", kDay, 2), ready, why) == ArrivalHold::Verdict::held);
  CHECK(ready.empty());
  // Clock at day 2: a record at day 0 has waited exactly the tolerance and goes.
  hold.offer(at("b", 2 * kDay, 3), ready, why);
  REQUIRE(ready.size() == 1);
  CHECK(ready[0].series == "a");
  CHECK(hold.held_count() == 2);
  // tick moves the clock without a record; release order is time order.
  hold.tick(at("x", 10 * kDay, 0).time, ready);
  REQUIRE(ready.size() == 3);
  CHECK(ready[1].count == 2);
  CHECK(ready[2].count == 3);
  CHECK(hold.held_count() == 0);
}

TEST_CASE("arrival hold: late records within the tolerance are judged as if they had come in order",
          "[engine][arrival]") {
  // Reference: the same records in time order through ingest() with no hold.
  SettingsTable settings = poisson_settings();
  const std::vector<Observation> ordered = two_series();
  Engine plain(settings);
  std::string expected;
  for (const Observation& o : ordered) {
    IngestResult r = plain.ingest(o);
    if (r.alert) expected += alert_json(*r.alert) + "\n";
  }
  REQUIRE(plain.counters().alerts_high + plain.counters().alerts_low >= 3);

  // Shuffled within the tolerance: every pair of days of each series arrives
  // newer day first, and trap-b's whole feed a day behind trap-a's.
  std::vector<Observation> shuffled;
  for (std::size_t d = 0; d + 1 < 90; d += 2) {
    shuffled.push_back(ordered[2 * (d + 1)]);  // a, day d+1
    shuffled.push_back(ordered[2 * d]);        // a, day d (one day late)
    if (d >= 2) {
      shuffled.push_back(ordered[2 * (d - 1) + 1]);  // b, day d-1
      shuffled.push_back(ordered[2 * (d - 2) + 1]);  // b, day d-2
    }
  }
  shuffled.push_back(ordered[2 * 89 + 1]);
  shuffled.push_back(ordered[2 * 88 + 1]);
  REQUIRE(shuffled.size() == ordered.size());

  EngineLimits limits;
  limits.arrival.late_tolerance = Seconds{3 * kDay};
  Engine held(settings, limits);
  std::string got;
  std::vector<Observation> judged;
  for (const Observation& o : shuffled) {
    OfferResult r = held.offer(o);
    CHECK_FALSE(r.refused);
    lines_of(r, got, &judged);
  }
  CHECK(held.held_count() > 0);  // the last days wait for the end of the feed
  lines_of(held.drain(), got, &judged);
  CHECK(held.held_count() == 0);
  CHECK(got == expected);
  CHECK(judged.size() == ordered.size());  // nothing lost
  CHECK(held.counters().records == plain.counters().records);
  CHECK(held.counters().judged == plain.counters().judged);
  CHECK(held.counters().rejected.total() == 0);
}

TEST_CASE("arrival hold: too late and out of place records are refused with their reason", "[engine][arrival]") {
  SettingsTable settings = poisson_settings();
  EngineLimits limits;
  limits.arrival.late_tolerance = Seconds{kDay};
  Engine engine(settings, limits);
  engine.offer(at("a", 5 * kDay, 4));
  // Older than trap a's newest by more than a day.
  OfferResult old = engine.offer(at("a", 3 * kDay, 4));
  REQUIRE(old.refused);
  CHECK(old.refused->reason == RejectReason::too_late);
  CHECK_THAT(old.refused->describe(),
             Catch::Contains("series 'a': time 2025-03-04T00:00:00Z is older than the series' newest record "
                             "2025-03-06T00:00:00Z by more than the late tolerance 1d"));
  // Series b pushes the clock to day 9: a's day-5 record is judged.
  OfferResult moved = engine.offer(at("b", 9 * kDay, 4));
  REQUIRE(moved.released.size() == 1);
  CHECK(moved.released[0].record.series == "a");
  // Within a day of a's newest, but before what a has been judged up to.
  OfferResult behind = engine.offer(at("a", 5 * kDay - 3600, 4));
  REQUIRE(behind.refused);
  CHECK(behind.refused->reason == RejectReason::too_late);
  CHECK_THAT(behind.refused->detail, Catch::Contains("judged up to 2025-03-06T00:00:00Z"));
  // The same time as a judged record.
  OfferResult again = engine.offer(at("a", 5 * kDay, 9));
  REQUIRE(again.refused);
  CHECK(again.refused->reason == RejectReason::duplicate_time);
  CHECK_THAT(again.refused->detail, Catch::Contains("already been judged"));
  CHECK(engine.counters().rejected[RejectReason::too_late] == 2);
  CHECK(engine.counters().rejected[RejectReason::duplicate_time] == 1);
  CHECK(engine.counters().records == 4);  // a@5d warming up + 3 refused; b's record still held
  CHECK(engine.held_count() == 1);
}

TEST_CASE("arrival hold: a duplicate of a held record is refused or replaces it, by policy", "[engine][arrival]") {
  SettingsTable settings = poisson_settings();
  for (DuplicatePolicy policy : {DuplicatePolicy::refuse, DuplicatePolicy::replace}) {
    EngineLimits limits;
    limits.arrival.late_tolerance = Seconds{kDay};
    limits.arrival.duplicates = policy;
    Engine engine(settings, limits);
    CHECK_FALSE(engine.offer(at("a", 0, 4)).refused);
    OfferResult dup = engine.offer(at("a", 0, 7));
    std::vector<Observation> judged;
    std::string ignored;
    lines_of(engine.drain(), ignored, &judged);
    REQUIRE(judged.size() == 1);
    if (policy == DuplicatePolicy::refuse) {
      REQUIRE(dup.refused);
      CHECK(dup.refused->reason == RejectReason::duplicate_time);
      CHECK_THAT(dup.refused->detail, Catch::Contains("already waiting"));
      CHECK(judged[0].count == 4);  // the first one stands
      CHECK(engine.counters().duplicates_replaced == 0);
    } else {
      CHECK_FALSE(dup.refused);
      CHECK(judged[0].count == 7);  // the later one is judged instead
      CHECK(engine.counters().duplicates_replaced == 1);
      CHECK(engine.counters().rejected.total() == 0);
    }
  }
}

TEST_CASE("arrival hold: beyond max_held the oldest record is judged early, none is dropped", "[engine][arrival]") {
  ArrivalHold hold(ArrivalSpec{Seconds{30 * kDay}, DuplicatePolicy::refuse, 3});
  std::vector<Observation> ready;
  std::optional<Rejection> why;
  for (int i = 0; i < 5; ++i) hold.offer(at("s" + std::to_string(i), i * 3600, i), ready, why);
  CHECK(hold.held_count() == 3);
  REQUIRE(ready.size() == 2);
  CHECK(ready[0].series == "s0");
  CHECK(ready[1].series == "s1");
  hold.drain(ready);
  CHECK(ready.size() == 5);
}

TEST_CASE("arrival hold: new series beyond the series limit are refused before they are held",
          "[engine][arrival]") {
  ArrivalHold hold(ArrivalSpec{Seconds{kDay}}, 2);
  std::vector<Observation> ready;
  std::optional<Rejection> why;
  CHECK(hold.offer(at("a", 0, 1), ready, why) == ArrivalHold::Verdict::held);
  CHECK(hold.offer(at("b", 0, 1), ready, why) == ArrivalHold::Verdict::held);
  CHECK(hold.offer(at("c", 0, 1), ready, why) == ArrivalHold::Verdict::refused);
  CHECK(why->reason == RejectReason::too_many_series);
  CHECK(hold.offer(at("a", 60, 1), ready, why) == ArrivalHold::Verdict::held);  // known series go on
}

TEST_CASE("arrival hold: held records survive a save and load", "[engine][arrival]") {
  ArrivalSpec spec{Seconds{2 * kDay}, DuplicatePolicy::replace};
  ArrivalHold hold(spec);
  std::vector<Observation> ready;
  std::optional<Rejection> why;
  Observation with_cov = at("a", kDay, 5);
  with_cov.covariates.push_back(Covariate{"temperature_c", -3.25});
  hold.offer(at("a", 0, 1), ready, why);
  hold.offer(with_cov, ready, why);
  hold.offer(at("b", 2 * kDay + 3600, 2), ready, why);  // releases a@0 only
  REQUIRE(ready.size() == 1);
  StateWriter w;
  hold.save_state(w);
  ArrivalHold back(spec);
  StateReader r(w.text());
  back.load_state(r);
  REQUIRE_FALSE(r.failed());
  CHECK(r.at_end());
  StateWriter again;
  back.save_state(again);
  CHECK(again.text() == w.text());
  CHECK(back.held_count() == 2);
  // The restored hold still knows a@0 was judged, and what it holds.
  std::vector<Observation> out;
  CHECK(back.offer(at("a", 0, 9), out, why) == ArrivalHold::Verdict::refused);
  CHECK(why->reason == RejectReason::duplicate_time);
  back.drain(out);
  REQUIRE(out.size() == 2);
  CHECK(out[0].where.source == "test");
  REQUIRE(out[0].covariate("temperature_c"));
  CHECK(*out[0].covariate("temperature_c") == -3.25);
}
