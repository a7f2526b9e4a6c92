#include "engine/sharded_engine.h"

#include <string>
#include <vector>

#include <catch2/catch.hpp>

#include "bounds/random.h"

using namespace tallyd;

namespace {

// A mixed feed: 30 series, daily, with a few spikes and a few bad records
// (a negative count, a zero exposure, a repeated time), in time order.
std::vector<Observation> mixed_feed() {
  std::vector<Observation> feed;
  bounds::Rng rng(31);
  const TimePoint start = parse_time("2025-03-01T06:00:00Z").value();
  for (int d = 0; d < 70; ++d) {
    for (int s = 0; s < 30; ++s) {
      Observation o;
      o.series = "site-" + std::to_string(s);
      o.time = start + Seconds{static_cast<std::int64_t>(d) * 86400};
      o.exposure = 0.5 + rng.uniform();
      o.count = rng.poisson(o.exposure * (3.0 + s));
      o.where = SourcePos{"mixed", feed.size() + 2};
      if (d == 50 && s % 7 == 0) o.count = 10 * o.count + 40;  // spikes
      if (d == 40 && s == 3) o.count = -1;
      if (d == 41 && s == 4) o.exposure = 0;
      feed.push_back(o);
      if (d == 42 && s == 5) feed.push_back(o);  // same time again: out of order
    }
  }
  return feed;
}

SettingsTable settings(bounds::Method method, bool shift = false) {
  SettingsTable t;
  t.defaults.model.family = glm::Family::quasipoisson;
  t.defaults.model.min_history = 20;
  t.defaults.alert.method = method;
  t.defaults.alert.draws = 500;
  t.defaults.alert.alpha = 0.01;
  t.defaults.detect.shift = shift;
  return t;
}

void check_same(const IngestResult& a, const IngestResult& b) {
  REQUIRE(a.kind == b.kind);
  REQUIRE(a.prediction.has_value() == b.prediction.has_value());
  if (a.prediction) {
    CHECK(a.prediction->bounds.lower == b.prediction->bounds.lower);
    CHECK(a.prediction->bounds.upper == b.prediction->bounds.upper);
    CHECK(a.prediction->bounds.p_high == b.prediction->bounds.p_high);
    CHECK(a.prediction->bounds.p_low == b.prediction->bounds.p_low);
  }
  REQUIRE(a.alert.has_value() == b.alert.has_value());
  if (a.alert) CHECK(a.alert->side == b.alert->side);
  REQUIRE(a.detector_alerts.size() == b.detector_alerts.size());
  for (std::size_t i = 0; i < a.detector_alerts.size(); ++i)
    CHECK(a.detector_alerts[i].detector == b.detector_alerts[i].detector);
  REQUIRE(a.rejection.has_value() == b.rejection.has_value());
  if (a.rejection) {
    CHECK(a.rejection->reason == b.rejection->reason);
    CHECK(a.rejection->detail == b.rejection->detail);
  }
}

}  // namespace

// The reference is the project's own single-threaded Engine: sharding is a
// scheduling change and must not change a single result.
TEST_CASE("sharded results equal one engine's, in input order, for any worker count", "[engine]") {
  const std::vector<Observation> feed = mixed_feed();
  for (const bounds::Method method : {bounds::Method::quadrature, bounds::Method::simulate}) {
    const SettingsTable s = settings(method);
    EngineLimits limits;
    limits.max_series = 25;  // five series are refused, as one engine would refuse them
    Engine single(s, limits);
    std::vector<IngestResult> want;
    for (const Observation& o : feed) want.push_back(single.ingest(o));
    REQUIRE(single.counters().alerts_high > 0);
    REQUIRE(single.counters().rejected[RejectReason::too_many_series] > 0);

    for (const int workers : {1, 2, 3}) {
      INFO("method " << bounds::to_string(method) << " workers " << workers);
      ShardedEngine sharded(s, workers, limits);
      std::vector<IngestResult> got;
      // Uneven batches, so that series are created in one batch and judged in later ones.
      for (std::size_t from = 0; from < feed.size();) {
        const std::size_t n = std::min<std::size_t>(feed.size() - from, 37 + from % 500);
        const std::vector<Observation> batch(feed.begin() + static_cast<long>(from),
                                             feed.begin() + static_cast<long>(from + n));
        for (IngestResult& r : sharded.ingest_batch(batch)) got.push_back(std::move(r));
        from += n;
      }
      REQUIRE(got.size() == want.size());
      for (std::size_t i = 0; i < got.size(); ++i) check_same(got[i], want[i]);
      const EngineCounters a = sharded.counters(), b = single.counters();
      CHECK(a.records == b.records);
      CHECK(a.judged == b.judged);
      CHECK(a.warming_up == b.warming_up);
      CHECK(a.alerts_high == b.alerts_high);
      CHECK(a.alerts_low == b.alerts_low);
      CHECK(a.rejected.by_reason == b.rejected.by_reason);
      CHECK(sharded.series_count() == single.series_count());
      CHECK(sharded.find("site-0") != nullptr);
      CHECK(sharded.find("site-29") == nullptr);  // refused by the limit
    }
  }
}

// The shift CUSUM's alerts and counters too (one method and worker count:
// the CUSUM's decision limits make this feed slow to judge).
TEST_CASE("sharded shift CUSUM alerts and counters equal one engine's", "[engine]") {
  std::vector<Observation> feed;
  for (const Observation& o : mixed_feed())  // sites 0-7, with the spikes of sites 0 and 7
    if (o.series.size() == 6) feed.push_back(o);
  const SettingsTable s = settings(bounds::Method::quadrature, true);
  Engine single(s);
  std::vector<IngestResult> want;
  for (const Observation& o : feed) want.push_back(single.ingest(o));
  REQUIRE(single.counters().alerts_shift > 0);
  ShardedEngine sharded(s, 2);
  const std::vector<IngestResult> got = sharded.ingest_batch(feed);
  REQUIRE(got.size() == want.size());
  for (std::size_t i = 0; i < got.size(); ++i) check_same(got[i], want[i]);
  const EngineCounters a = sharded.counters(), b = single.counters();
  CHECK(a.alerts_shift == b.alerts_shift);
  CHECK(a.alerts_low_run == b.alerts_low_run);
  CHECK(a.alerts_high == b.alerts_high);
  CHECK(a.alerts_low == b.alerts_low);
}

TEST_CASE("a series always lands on the same worker", "[engine]") {
  const SettingsTable s = settings(bounds::Method::quadrature);
  ShardedEngine two(s, 2);
  CHECK(two.workers() == 2);
  CHECK(two.shard_of("site-1") == bounds::stable_hash("site-1") % 2);
  CHECK(ShardedEngine(s, 0).workers() == 1);
}

// Series that appear one by one, fed in small batches on persistent workers:
// the early batches cannot reach the series limit (the admission pass is
// skipped for them), later ones straddle it. Reference: one Engine fed the
// same records one by one.
TEST_CASE("sharded admission skipped only while the limit cannot bind, over many small batches", "[engine]") {
  std::vector<Observation> feed;
  for (const Observation& o : mixed_feed()) {
    const int site = std::stoi(o.series.substr(5));
    const int day = static_cast<int>((o.time - parse_time("2025-03-01T06:00:00Z").value()).count() / 86400);
    if (day >= site && day < 45) feed.push_back(o);  // site s first reports on day s
  }
  const SettingsTable s = settings(bounds::Method::quadrature);
  EngineLimits limits;
  limits.max_series = 20;
  Engine single(s, limits);
  std::vector<IngestResult> want;
  for (const Observation& o : feed) want.push_back(single.ingest(o));
  REQUIRE(single.counters().rejected[RejectReason::too_many_series] > 0);

  ShardedEngine sharded(s, 2, limits);
  std::vector<IngestResult> got;
  std::size_t batches = 0;
  for (std::size_t from = 0; from < feed.size(); ++batches) {
    const std::size_t n = std::min<std::size_t>(feed.size() - from, 1 + batches % 7);
    const std::vector<Observation> batch(feed.begin() + static_cast<long>(from),
                                         feed.begin() + static_cast<long>(from + n));
    for (IngestResult& r : sharded.ingest_batch(batch)) got.push_back(std::move(r));
    from += n;
  }
  REQUIRE(batches > 100);
  REQUIRE(got.size() == want.size());
  for (std::size_t i = 0; i < got.size(); ++i) check_same(got[i], want[i]);
  CHECK(sharded.counters().rejected.by_reason == single.counters().rejected.by_reason);
  CHECK(sharded.series_count() == 20);
  REQUIRE(sharded.worker_busy_seconds().size() == 2);
  CHECK(sharded.batch_seconds() > 0);
}
