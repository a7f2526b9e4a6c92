#include "daemon/judge_thread.h"

#include <catch2/catch.hpp>

#include <atomic>
#include <filesystem>

#include "support/temp_dir.h"

using namespace tallyd;
using namespace tallyd::daemon;

namespace {

Observation at(std::int64_t day, std::int64_t count) {
  Observation o;
  o.time = parse_time("2025-07-01T05:00:00Z").value() + Seconds{day * 86400};
  o.series = "trap-a";
  o.count = count;
  o.where = SourcePos{"feed.csv", static_cast<std::uint64_t>(day + 2)};
  return o;
}

// Days [from, to) of one followed file, its mark after them at `offset`.
LineBatch days(SourceFigures& figures, std::int64_t from, std::int64_t to, std::uint64_t offset) {
  LineBatch b;
  b.figures = &figures;
  b.arrival = std::chrono::steady_clock::now();
  for (std::int64_t d = from; d < to; ++d) b.lines.push_back(ParseOutcome::of(at(d, d == 25 ? 80 : 4 + d % 3)));
  b.mark = checkpoint::FileMark{};
  b.mark->path = "feed.csv";
  b.mark->inode = 7;
  b.mark->offset = offset;
  b.mark->format = 0;
  b.mark->header = "time,series,count";
  return b;
}

}  // namespace

TEST_CASE("judging thread: a checkpoint records exactly the batches judged before it", "[daemon][judge]") {
  testing::TempDir dir;
  SourceFigures figures;
  figures.name = "feed";
  JudgeSetup setup;
  setup.config_path = dir.path("absent.toml");
  setup.config = std::make_unique<MonitorConfig>();
  setup.config->settings.defaults.model.min_history = 10;
  setup.config->service.checkpoint_path = dir.path("state.ckpt");
  setup.log = std::move(AlertLog::open(dir.path("alerts.jsonl"), "").value());
  setup.intake = std::make_unique<Intake>(
      std::make_unique<Engine>(setup.config->settings, setup.config->limits, setup.config->fdr), *setup.log);
  setup.sources = {&figures};
  const SettingsTable settings = setup.config->settings;  // to read the checkpoints back

  asio::io_context loop;
  Handoff handoff(loop, 1000);
  std::atomic<bool> finished = false;
  JudgeThread judge(std::move(setup), handoff, [&] { finished = true; });
  REQUIRE(judge.write_checkpoint_now());
  judge.start();

  // Batch 1, a checkpoint, a copy of it taken by a task right after, batch 2.
  std::string middle;
  handoff.push(days(figures, 0, 20, 400));
  judge.request_checkpoint();
  handoff.post([&] { middle = testing::read_text(dir.path("state.ckpt")); });
  handoff.push(days(figures, 20, 30, 600));  // day 25 is a spike: an alert after the middle checkpoint
  handoff.close();                           // a graceful stop: drain, then the final checkpoint
  judge.join();
  CHECK(finished);
  CHECK_FALSE(judge.failed());

  auto mid = checkpoint::decode(middle, "middle", settings, EngineLimits{}, detect::FdrSpec{});
  REQUIRE(mid);
  REQUIRE(mid->marks.files.size() == 1);
  CHECK(mid->marks.files[0].offset == 400);          // not 600: batch 2 was read but not judged yet
  CHECK(mid->engine->counters().records == 20);
  CHECK(mid->marks.alert_log_bytes == 0);            // no alert among the first 20 days

  auto last = checkpoint::read_file(dir.path("state.ckpt"), settings, EngineLimits{}, detect::FdrSpec{});
  REQUIRE(last);
  REQUIRE(*last);
  CHECK((*last)->marks.files[0].offset == 600);
  CHECK((*last)->marks.files[0].header == "time,series,count");
  CHECK((*last)->engine->counters().records == 30);
  const std::uintmax_t log_bytes = std::filesystem::file_size(dir.path("alerts.jsonl"));
  CHECK(log_bytes > 0);  // the spike alerted
  CHECK((*last)->marks.alert_log_bytes == log_bytes);

  const JudgedFigures shown = judge.snapshot();
  CHECK(shown.counters.records == 30);
  CHECK(shown.sources.at(0).first == 30);
  CHECK(shown.judged_bytes.at("feed.csv") == 600);
  CHECK(shown.alert_log_bytes == log_bytes);
  CHECK(shown.checkpoints_written == 3);  // start-up, requested, final
  CHECK(handoff.queued_lines() == 0);
}
