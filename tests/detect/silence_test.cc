#include "detect/silence.h"

#include <catch2/catch.hpp>

#include <string>
#include <vector>

#include "alert/alert_format.h"
#include "core/state_codec.h"
#include "engine/engine.h"

using namespace tallyd;
using namespace tallyd::detect;

namespace {

constexpr std::int64_t kDay = 86400;

TimePoint day0() { return parse_time("2025-05-01T07:00:00Z").value(); }

Observation at(const std::string& series, std::int64_t seconds, std::int64_t count = 3) {
  Observation o;
  o.time = day0() + Seconds{seconds};
  o.series = series;
  o.count = count;
  o.exposure = 2;
  return o;
}

DetectSpec watching(double multiple = 3.0, std::uint32_t min_gaps = 5, std::uint32_t window = 15) {
  DetectSpec d;
  d.silence = true;
  d.silence_multiple = multiple;
  d.silence_min_gaps = min_gaps;
  d.silence_window = window;
  return d;
}

}  // namespace

TEST_CASE("silence: the usual interval is the median of the gaps", "[detect][silence]") {
  // Median of an odd and of an even count (mean of the middle two, rounded half up): common practice.
  CHECK_FALSE(median_gap({}));
  CHECK(median_gap({86400})->count() == 86400);
  CHECK(median_gap({5, 1, 9})->count() == 5);
  CHECK(median_gap({10, 40, 20, 30})->count() == 25);
  CHECK(median_gap({2, 3})->count() == 3);  // 2.5 rounds up
  // One long outage barely moves it; the mean would be 18 days.
  CHECK(median_gap({kDay, kDay, 86 * kDay, kDay, kDay})->count() == kDay);
}

TEST_CASE("silence: a daily series that stops gets one silence alert, then one recovery line", "[detect][silence]") {
  SilenceWatch w;
  const DetectSpec spec = watching();
  for (std::int64_t d = 0; d <= 10; ++d) {
    CHECK(w.advance(at("s", d * kDay).time).empty());
    CHECK_FALSE(w.report(at("s", d * kDay), spec));
  }
  REQUIRE(w.usual_interval("s"));
  CHECK(w.usual_interval("s")->count() == kDay);
  // Last record at day 10; silent once the clock is past day 13 (3 usual intervals).
  CHECK(w.advance(at("x", 13 * kDay).time).empty());  // exactly at the deadline: not yet
  std::vector<Alert> silent = w.advance(at("x", 13 * kDay + 1).time);
  REQUIRE(silent.size() == 1);
  const Alert& a = silent[0];
  CHECK(a.series == "s");
  CHECK(a.detector == "silence");
  CHECK(a.side == AlertSide::low);
  CHECK(a.time == at("s", 13 * kDay).time);
  CHECK(a.statistic == kDay);
  REQUIRE(a.last_seen);
  CHECK(*a.last_seen == at("s", 10 * kDay).time);
  CHECK(w.silent_count() == 1);
  // Once only, however long it lasts.
  CHECK(w.advance(at("x", 30 * kDay).time).empty());
  CHECK(w.advance(at("x", 40 * kDay).time).empty());

  std::optional<Alert> back = w.report(at("s", 41 * kDay, 7), spec);
  REQUIRE(back);
  CHECK(back->detector == "silence_end");
  CHECK(back->count == 7);
  CHECK(back->time == at("s", 41 * kDay).time);
  CHECK(back->statistic == 31 * kDay);
  CHECK(*back->last_seen == at("s", 10 * kDay).time);
  CHECK(w.silent_count() == 0);
  CHECK_FALSE(w.report(at("s", 42 * kDay), spec));  // the next record is ordinary again

  // The JSON line keeps the fixed keys first, then last_seen.
  CHECK(alert_json(a) ==
        R"({"time":"2025-05-14T07:00:00Z","series":"s","count":0,"expected":0.0000,"lower":0,"upper":0,"p_value":1,)"
        R"("direction":"low","exposure":0,"alpha":0,"detector":"silence","statistic":86400,)"
        R"("last_seen":"2025-05-11T07:00:00Z"})");
  CHECK(alert_text(a) == "2025-05-14T07:00:00Z s SILENT: no record since 2025-05-11T07:00:00Z (usual interval 1d)");
  CHECK(alert_text(*back) ==
        "2025-06-11T07:00:00Z s REPORTING again after 31d without a record (count 7, exposure 2)");
}

TEST_CASE("silence: irregular intervals are judged by their median, not their mean", "[detect][silence]") {
  SilenceWatch w;
  const DetectSpec spec = watching(3.0, 5, 15);
  // Gaps of 1, 2, 2, 3 and 12 days: median 2 days (mean 4).
  std::int64_t t = 0;
  w.report(at("s", t), spec);
  for (std::int64_t gap : {1, 2, 2, 3, 12}) {
    t += gap * kDay;
    w.report(at("s", t), spec);
  }
  CHECK(w.usual_interval("s")->count() == 2 * kDay);
  CHECK(w.advance(at("x", t + 6 * kDay).time).empty());
  CHECK(w.advance(at("x", t + 6 * kDay + 1).time).size() == 1);  // 3 x 2 days, not 3 x 4
}

TEST_CASE("silence: not armed before enough gaps, and off series are not watched", "[detect][silence]") {
  SilenceWatch w;
  const DetectSpec spec = watching(3.0, 5, 15);
  for (std::int64_t d = 0; d < 5; ++d) w.report(at("young", d * kDay), spec);  // 4 gaps
  CHECK_FALSE(w.usual_interval("young"));
  CHECK(w.advance(at("x", 400 * kDay).time).empty());
  // The fifth gap arms it.
  w.report(at("young", 401 * kDay), spec);
  CHECK(w.usual_interval("young")->count() == kDay);

  // Through the engine a series without detect.silence is not watched at all.
  SettingsTable settings;
  settings.defaults.model.min_history = 5;
  Engine engine(settings);
  for (std::int64_t d = 0; d < 20; ++d) engine.offer(at("quiet", d * kDay));
  OfferResult later = engine.tick(at("x", 100 * kDay).time);
  CHECK(later.silence.empty());
  CHECK(engine.counters().alerts_silence == 0);
}

TEST_CASE("silence: through the engine, replay order and a save/load give the same lines", "[detect][silence]") {
  // Reference: the uninterrupted run; the engine's data clock is the record time.
  SettingsTable settings;
  settings.defaults.model.min_history = 5;
  settings.defaults.detect = watching(2.5, 4, 8);
  std::vector<Observation> feed;
  for (std::int64_t d = 0; d < 60; ++d) {
    if (d < 20 || d >= 35) feed.push_back(at("trap-north", d * kDay, 4 + d % 3));  // silent for 15 days
    feed.push_back(at("trap-south", d * kDay + 600, 5 + d % 2));
  }
  auto run = [&](Engine& e, std::size_t from, std::size_t to) {
    std::string out;
    for (std::size_t i = from; i < to; ++i) {
      OfferResult r = e.offer(feed[i]);
      for (const Released& rel : r.released) {
        for (const Alert& a : rel.silence) out += alert_json(a) + "\n";
        if (rel.result.recovery) out += alert_json(*rel.result.recovery) + "\n";
      }
      for (const Alert& a : r.silence) out += alert_json(a) + "\n";
    }
    return out;
  };
  Engine whole(settings);
  const std::string expected = run(whole, 0, feed.size());
  // Exactly one silence alert (deadline: day 19 + 2.5 days) and one recovery (day 35).
  CHECK(whole.counters().alerts_silence == 1);
  CHECK(whole.counters().silence_ends == 1);
  CHECK(expected.find(R"("time":"2025-05-22T19:00:00Z","series":"trap-north")") != std::string::npos);
  CHECK(expected.find(R"("time":"2025-06-05T07:00:00Z","series":"trap-north")") != std::string::npos);
  CHECK(whole.counters().alerts_low >= 1);

  Engine again(settings);
  CHECK(run(again, 0, feed.size()) == expected);  // deterministic

  for (std::size_t cut : {std::size_t{30}, std::size_t{45}, std::size_t{60}}) {  // before, during, after the silence
    Engine first(settings);
    std::string got = run(first, 0, cut);
    StateWriter w;
    first.save_state(w);
    Engine second(settings);
    StateReader r(w.text());
    second.load_state(r);
    REQUIRE_FALSE(r.failed());
    got += run(second, cut, feed.size());
    INFO("cut at record " << cut);
    CHECK(got == expected);
  }
}
