#include "series/series_model.h"

#include <algorithm>
#include <bit>
#include <cmath>
#include <cstdint>
#include <cstring>
#include <string>

#include <catch2/catch.hpp>
#include <fmt/format.h>

#include "bounds/random.h"
#include "core/bulk_memory.h"
#include "core/state_codec.h"
#include "feed/feed_merge.h"
#include "support/piece_source.h"

using namespace tallyd;

namespace {

// A seasonal count series whose mean nearly touches zero once a cycle, with
// exposure varying 1 to 4: the case where the first IRLS step under the
// sqrt and identity links leaves the valid region.
std::vector<Observation> seasonal_series() {
  std::vector<Observation> out;
  bounds::Rng rng(99);
  const TimePoint start = parse_time("2024-01-01T00:00:00Z").value();
  for (int d = 0; d < 120; ++d) {
    Observation o;
    o.series = "s";
    o.time = start + Seconds{static_cast<std::int64_t>(d) * 86400};
    o.exposure = 1.0 + 3.0 * rng.uniform();
    const double phase = 2 * M_PI * std::fmod(static_cast<double>(o.time.time_since_epoch().count()), 7 * 86400.0) /
                         (7 * 86400.0);
    o.count = rng.poisson(o.exposure * (4.0 + 3.9 * std::sin(phase)));
    out.push_back(o);
  }
  return out;
}

// Saves `model` in `layout` and loads that state into `restored` (offering a
// 1 MiB block for its rows when `offer`); the restored model must save the
// same state again. Returns the state.
std::string save_and_restore(const SeriesModel& model, SeriesModel& restored, StateLayout layout, bool offer) {
  StateWriter w(layout);
  model.save_state(w);
  StateReader r(w.text(), layout);
  if (offer) r.offer_memory(BulkMemory::create(1 << 20));
  restored.load_state(r);
  REQUIRE_FALSE(r.failed());
  StateWriter again(layout);
  restored.save_state(again);
  CHECK(again.text() == w.text());
  return std::string(w.text());
}

}  // namespace

TEST_CASE("sqrt and identity links fit exposure-scaled seasonal designs", "[series]") {
  for (glm::Link link : {glm::Link::log, glm::Link::sqrt, glm::Link::identity}) {
    SeriesSettings settings;
    settings.model.family = glm::Family::poisson;
    settings.model.link = link;
    settings.model.seasons = {Season{Seconds{7 * 86400}, 1}};
    settings.model.window = Window{};
    settings.model.min_history = 1000;  // learn only
    SeriesModel model("s", settings);
    for (const Observation& o : seasonal_series()) model.learn(o);
    const glm::FitResult fit = model.fit_report();
    INFO("link " << glm::to_string(link) << ": " << fit.note);
    CHECK(fit.status == glm::FitStatus::ok);
    // The rate per unit exposure is 4 + 3.9 sin: the intercept recovers about 4
    // on the rate scale under every link (identity: 4; sqrt: ~2; log: ~log 3).
    const double b0 = fit.coefficients(0);
    if (link == glm::Link::identity) CHECK(b0 == Approx(4.0).margin(0.5));
    if (link == glm::Link::sqrt) CHECK(b0 * b0 == Approx(3.6).margin(0.8));
    CHECK(std::isfinite(fit.aic));
  }
}

TEST_CASE("sqrt and identity links fit a real-shaped trap series with many zero checks", "[series]") {
  // orchard-c05 of the bundled demo feed: a late-summer flight peak over
  // quiet spring and autumn checks. From mu = y + 0.1 the first IRLS step
  // under the sqrt and identity links gives negative means, so the fit must
  // step back to the constant-rate fit (the case where R's glm.fit stops and
  // asks for starting values).
  auto feeds = FeedSet::open({std::string(TALLYD_SOURCE_DIR) + "/demo_feeds/moth_traps.csv"}, ReadOptions{});
  REQUIRE(feeds.ok());
  std::vector<Observation> records;
  FeedItem item;
  while (feeds->next(item))
    if (item.is_record() && item.record().series == "orchard-c05") records.push_back(item.record());
  REQUIRE(records.size() > 80);
  for (glm::Link link : {glm::Link::sqrt, glm::Link::identity}) {
    SeriesSettings settings;
    settings.model.family = glm::Family::poisson;
    settings.model.link = link;
    settings.model.covariates = {"temperature_c"};
    settings.model.seasons = {Season{Seconds{31557600}, 2}};
    settings.model.window = Window{};
    settings.model.min_history = 1000;  // learn only
    SeriesModel model("orchard-c05", settings);
    for (const Observation& o : records) model.learn(o);
    const glm::FitResult fit = model.fit_report();
    INFO("link " << glm::to_string(link) << ": " << fit.note);
    CHECK(fit.status == glm::FitStatus::ok);
    CHECK(std::isfinite(fit.aic));
  }
}

TEST_CASE("the window keeps the newest records by span and by count", "[series]") {
  SeriesSettings settings;
  settings.model.family = glm::Family::poisson;
  settings.model.min_history = 1000;
  settings.model.window = Window{Seconds{10 * 86400}, std::nullopt};
  SeriesModel by_span("s", settings);
  for (const Observation& o : seasonal_series()) by_span.learn(o);
  CHECK(by_span.history_size() == 10);  // daily records newer than latest - 10 days
  settings.model.window = Window{std::nullopt, 25};
  SeriesModel by_count("s", settings);
  for (const Observation& o : seasonal_series()) by_count.learn(o);
  CHECK(by_count.history_size() == 25);
}

// The seasonal design columns a series keeps with its records are derived
// from the times and not saved; a model restored from its state computes
// them again, so its later fits must match the original's bit for bit, under
// every link (the exposure scaling of sqrt and identity included).
TEST_CASE("a restored model refits exactly like the original", "[series]") {
  const std::vector<Observation> records = seasonal_series();
  for (glm::Link link : {glm::Link::log, glm::Link::sqrt, glm::Link::identity}) {
    INFO("link " << glm::to_string(link));
    SeriesSettings settings;
    settings.model.family = glm::Family::poisson;
    settings.model.link = link;
    settings.model.trend = true;
    settings.model.seasons = {Season{Seconds{7 * 86400}, 2}};
    settings.model.window = Window{std::nullopt, 60};
    SeriesModel original("s", settings);
    for (std::size_t i = 0; i < 80; ++i) original.learn(records[i]);
    StateWriter w;
    original.save_state(w);
    SeriesModel restored("s", settings);
    StateReader r(w.text());
    restored.load_state(r);
    REQUIRE_FALSE(r.failed());
    for (std::size_t i = 80; i < records.size(); ++i) {
      original.learn(records[i]);
      restored.learn(records[i]);
    }
    REQUIRE(original.has_fit());
    REQUIRE(restored.fits_done() == original.fits_done());
    for (Eigen::Index j = 0; j < original.fit().coefficients().size(); ++j) {
      CHECK(restored.fit().coefficients()(j) == original.fit().coefficients()(j));
    }
    CHECK(restored.fit().dispersion == original.fit().dispersion);
  }
}

// A restore may place the history in memory the reader offers (the
// checkpoint's bulk mapping, core/bulk_memory.h). A model restored there
// with a window not yet full must grow out of that block and still refit,
// bit for bit, like the original; and one restored without the offer alike.
TEST_CASE("a model restored into offered memory grows out of it and refits exactly like the original", "[series]") {
  const std::vector<Observation> records = seasonal_series();
  SeriesSettings settings;
  settings.model.family = glm::Family::quasipoisson;
  settings.model.trend = true;
  settings.model.covariates = {"rain_mm"};
  settings.model.seasons = {Season{Seconds{7 * 86400}, 2}};
  settings.model.window = Window{std::nullopt, 70};
  std::vector<Observation> with_rain = records;
  for (std::size_t i = 0; i < with_rain.size(); ++i)
    with_rain[i].covariates = {{"rain_mm", static_cast<double>((i * 7) % 11)}};
  SeriesModel original("s", settings);
  for (std::size_t i = 0; i < 40; ++i) original.learn(with_rain[i]);  // 40 of a 70-record window
  for (StateLayout layout : {StateLayout::text, StateLayout::binary}) {
    StateWriter w(layout);
    original.save_state(w);
    StateReader r(w.text(), layout);
    r.offer_memory(BulkMemory::create(1 << 20));
    REQUIRE(r.memory() != nullptr);
    SeriesModel restored("s", settings);
    restored.load_state(r);
    REQUIRE_FALSE(r.failed());
    CHECK(r.memory()->used() >= 40 * (8 + 8));  // records and covariates went into the offered block
    // and so did the fit's arrays (series/model_fit.h): 7 coefficients
    // (padded to 8), a 7 x 7 covariance and 7 flags in a double.
    CHECK(r.memory()->used() >= 40 * (8 + 8) + (8 + 7 * 7 + 1) * sizeof(double));
    // Judged right after the restore, a record gets the original's bounds, bit for bit.
    REQUIRE(original.ready());
    const Prediction before = original.predict(with_rain[40]);
    const Prediction after = restored.predict(with_rain[40]);
    CHECK(std::bit_cast<std::uint64_t>(after.predictor.eta_mean) == std::bit_cast<std::uint64_t>(before.predictor.eta_mean));
    CHECK(std::bit_cast<std::uint64_t>(after.predictor.eta_variance) ==
          std::bit_cast<std::uint64_t>(before.predictor.eta_variance));
    SeriesModel copy_of_original("s", settings);
    StateReader again(w.text(), layout);
    copy_of_original.load_state(again);  // without an offer: the heap
    REQUIRE_FALSE(again.failed());
    SeriesModel reference("s", settings);
    for (std::size_t i = 0; i < 40; ++i) reference.learn(with_rain[i]);
    for (std::size_t i = 40; i < with_rain.size(); ++i) {
      reference.learn(with_rain[i]);
      restored.learn(with_rain[i]);
      copy_of_original.learn(with_rain[i]);
    }
    REQUIRE(reference.has_fit());
    CHECK(restored.history_size() == 70);
    REQUIRE(restored.fits_done() == reference.fits_done());
    REQUIRE(copy_of_original.fits_done() == reference.fits_done());
    for (Eigen::Index j = 0; j < reference.fit().coefficients().size(); ++j) {
      CHECK(restored.fit().coefficients()(j) == reference.fit().coefficients()(j));
      CHECK(copy_of_original.fit().coefficients()(j) == reference.fit().coefficients()(j));
    }
    CHECK(restored.fit().dispersion == reference.fit().dispersion);
    CHECK(restored.first_time_in_window() == reference.first_time_in_window());
  }
}

// A history keeps exposure and prior weight per record only once a record
// of the window has one that is not exactly 1 (series_model.h, scales_).
// Saved and restored before those rows start, while they hold other values,
// and after those records have left the window, in both layouts, with and
// without offered memory, a model must save the same bytes as the one it was
// restored from and go on to fit exactly like a model never interrupted
// (the same code without a restore is the reference: exactness, not a
// statistical claim).
TEST_CASE("exposure and weight rows start at the first value other than 1 and round-trip exactly", "[series]") {
  const std::vector<Observation> seasonal = seasonal_series();
  std::vector<Observation> records = seasonal;
  for (std::size_t i = 0; i < records.size(); ++i)
    if (i < 50 || i > 58) records[i].exposure = 1.0;  // other exposures only in records 50-58
  const auto weight_of = [](std::size_t i) { return i == 55 ? 0.25 : i == 57 ? -0.0 : 1.0; };
  SeriesSettings settings;
  settings.model.family = glm::Family::quasipoisson;
  settings.model.trend = true;
  settings.model.seasons = {Season{Seconds{7 * 86400}, 2}};
  settings.model.window = Window{std::nullopt, 30};
  for (std::size_t cut : {std::size_t{40}, std::size_t{56}, std::size_t{100}}) {
    for (StateLayout layout : {StateLayout::text, StateLayout::binary}) {
      for (bool offer : {false, true}) {
        INFO("cut " << cut << " binary " << (layout == StateLayout::binary) << " offer " << offer);
        SeriesModel reference("s", settings);
        for (std::size_t i = 0; i < cut; ++i) reference.learn(records[i], weight_of(i));
        SeriesModel restored("s", settings);
        save_and_restore(reference, restored, layout, offer);
        for (std::size_t i = cut; i < records.size(); ++i) {
          reference.learn(records[i], weight_of(i));
          restored.learn(records[i], weight_of(i));
        }
        REQUIRE(reference.has_fit());
        REQUIRE(restored.fits_done() == reference.fits_done());
        for (Eigen::Index j = 0; j < reference.fit().coefficients().size(); ++j)
          CHECK(restored.fit().coefficients()(j) == reference.fit().coefficients()(j));
        CHECK(restored.fit().dispersion == reference.fit().dispersion);
        StateWriter end_reference(layout), end_restored(layout);
        reference.save_state(end_reference);
        restored.save_state(end_restored);
        CHECK(end_restored.text() == end_reference.text());
      }
    }
  }
  // The weights reach the fit: a model that learned weight 0.25 for record 55
  // fits differently from one that learned 1 (a check that the rows are used).
  SeriesModel weighted("s", settings), unweighted("s", settings);
  for (std::size_t i = 0; i < 60; ++i) {
    weighted.learn(records[i], weight_of(i));
    unweighted.learn(records[i]);
  }
  REQUIRE(weighted.has_fit());
  CHECK(weighted.fit().coefficients()(0) != unweighted.fit().coefficients()(0));
}

// A record is kept in 8 bytes (seconds after the first record, count) when
// both fit in 32 bits; a window with one that does not keeps every record's
// time and count in full (series_model.h, wide_). A count of 5 billion and a
// record 140 years after the first must come back exactly: in the saved
// text, after a restore at any point, and in the fits that follow.
TEST_CASE("a record whose count or time does not fit 32 bits is kept in full and round-trips exactly", "[series]") {
  std::vector<Observation> records = seasonal_series();
  records.resize(70);
  records[45].count = 5'000'000'000;
  Observation late = records.back();
  late.time = records.front().time + Seconds{std::int64_t{140} * 365 * 86400};
  records.push_back(late);
  SeriesSettings settings;
  settings.model.family = glm::Family::quasipoisson;
  settings.model.trend = true;
  settings.model.window = Window{std::nullopt, 30};
  for (std::size_t cut : {std::size_t{40}, std::size_t{50}, std::size_t{71}}) {
    for (StateLayout layout : {StateLayout::text, StateLayout::binary}) {
      for (bool offer : {false, true}) {
        INFO("cut " << cut << " binary " << (layout == StateLayout::binary) << " offer " << offer);
        SeriesModel reference("s", settings);
        for (std::size_t i = 0; i < cut; ++i) reference.learn(records[i]);
        SeriesModel restored("s", settings);
        const std::string saved = save_and_restore(reference, restored, layout, offer);
        if (layout == StateLayout::text && cut == 50) CHECK(saved.find(" 5000000000 ") != std::string::npos);
        if (layout == StateLayout::text && cut == 71)
          CHECK(saved.find(fmt::format("\n{} ", late.time.time_since_epoch().count())) != std::string::npos);
        CHECK(restored.last_time() == reference.last_time());
        CHECK(restored.first_time_in_window() == reference.first_time_in_window());
        Observation next = late;
        next.time = late.time + Seconds{86400};
        if (cut < records.size()) next = records[cut];
        reference.learn(next);
        restored.learn(next);
        REQUIRE(restored.fits_done() == reference.fits_done());
        for (Eigen::Index j = 0; j < reference.fit().coefficients().size(); ++j)
          CHECK(restored.fit().coefficients()(j) == reference.fit().coefficients()(j));
      }
    }
  }
}

// A binary history is decoded straight from the reader's buffer until the
// buffer runs short or a record looks unusual, and record by record there
// (series_state.cc). A flags byte written in two bytes (a longer LEB128 of
// the same value) must read as the usual one, whatever the piece size of a
// streaming reader, and an unknown flags value must be refused with the
// record-by-record path's words.
TEST_CASE("a binary history reads the same record by record and from the buffer", "[series]") {
  std::vector<Observation> records = seasonal_series();
  for (Observation& o : records) o.exposure = 1.0;  // flags byte 3: exposure and weight 1
  SeriesSettings settings;
  settings.model.family = glm::Family::quasipoisson;
  settings.model.trend = true;
  settings.model.window = Window{std::nullopt, 60};
  SeriesModel original("s", settings);
  for (const Observation& o : records) original.learn(o);
  StateWriter w(StateLayout::binary);
  original.save_state(w);
  const std::string saved = w.text();
  // A record one day after the one before: flags 3, zigzag(86400) = 172800
  // in three bytes, then its count. The 20th such record gets its flags in
  // two bytes, or an unknown value.
  const std::string daily("\x03\x80\xc6\x0a", 4);
  std::size_t at = 0;
  for (int i = 0; i < 20; ++i) at = saved.find(daily, at + 1);
  REQUIRE(at != std::string::npos);
  const std::string long_flags = saved.substr(0, at) + std::string("\x83\x00", 2) + saved.substr(at + 1);
  const std::string bad_flags = saved.substr(0, at) + "\x05" + saved.substr(at + 1);
  for (std::size_t piece : {std::size_t{0}, std::size_t{1}, std::size_t{7}, std::size_t{64}, std::size_t{4096}}) {
    INFO("piece " << piece);
    const auto load = [&](const std::string& state, SeriesModel& into) {
      if (piece == 0) {
        StateReader r(state, StateLayout::binary);
        into.load_state(r);
        return r.error();
      }
      testing::PieceSource source(state, piece);
      StateReader r(source, state.size(), piece);
      into.load_state(r);
      return r.error();
    };
    SeriesModel plain("s", settings), longer("s", settings), bad("s", settings);
    CHECK(load(saved, plain).empty());
    CHECK(load(long_flags, longer).empty());
    for (const SeriesModel* m : {&plain, &longer}) {
      StateWriter again(StateLayout::binary);
      m->save_state(again);
      CHECK(again.text() == saved);
    }
    const std::string error = load(bad_flags, bad);
    CHECK_THAT(error, Catch::Contains("history record flags 5 unknown"));
    CHECK_THAT(error, Catch::Contains(fmt::format("at byte {}:", at + 1)));
  }
}

// A damaged checkpoint whose fit claims a covariance far larger than the
// rest of its state is refused before anything of that size is allocated.
TEST_CASE("a saved fit claiming a covariance larger than its state is refused by name", "[series]") {
  std::vector<Observation> records = seasonal_series();
  SeriesSettings settings;
  settings.model.family = glm::Family::quasipoisson;
  settings.model.trend = true;
  SeriesModel reference("s", settings);
  for (std::size_t i = 0; i < 60; ++i) reference.learn(records[i]);
  REQUIRE(reference.has_fit());
  StateWriter w;
  reference.save_state(w);
  const std::string saved = w.text();
  // The fit line: "fit <status> <n>:<note> <nc> <nc values> <na> <na flags> <rows> <cols> ...".
  std::size_t at = saved.find("\nfit ");
  REQUIRE(at != std::string::npos);
  at += 5;
  auto token = [&saved, &at]() {
    const std::size_t end = saved.find(' ', at);
    std::string t = saved.substr(at, end - at);
    at = end + 1;
    return t;
  };
  token();                                          // status
  const std::size_t colon = saved.find(':', at);    // note, length-prefixed
  at = colon + 1 + std::stoul(saved.substr(at, colon - at)) + 1;
  const std::size_t nc = std::stoul(token());
  for (std::size_t i = 0; i < nc; ++i) token();
  const std::size_t na = std::stoul(token());
  for (std::size_t i = 0; i < na; ++i) token();
  const std::string damaged = saved.substr(0, at) + "9000 9000 1 2 3\n";
  SeriesModel restored("s", settings);
  StateReader r(damaged);
  restored.load_state(r);
  REQUIRE(r.failed());
  CHECK(r.error().find("covariance of 9000 x 9000") != std::string::npos);
}
