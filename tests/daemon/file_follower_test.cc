#include "daemon/file_follower.h"

#include <cstdio>
#include <fstream>

#include <catch2/catch.hpp>

#include "support/temp_dir.h"

using namespace tallyd;
using namespace tallyd::daemon;

namespace {

void append(const std::string& path, const std::string& text) {
  std::ofstream(path, std::ios::app | std::ios::binary) << text;
}

std::string row(int day, int count) {
  return std::to_string(1700000000 + day * 86400) + ",trap-a," + std::to_string(count) + ",1\n";
}

struct Rig {
  testing::TempDir dir{"tallyd-follow"};
  SettingsTable settings;
  std::unique_ptr<AlertLog> log = std::move(AlertLog::open(dir.path("alerts.jsonl"), "").value());
  Intake intake{std::make_unique<Engine>(settings), *log};
  SourceFigures figures;

  // One poll, its batch judged at once (what the judging thread does later).
  bool poll(FileFollower& f, std::size_t budget = 1 << 20) {
    LineBatch batch;
    const bool more = f.poll(batch, budget);
    for (ParseOutcome& line : batch.lines) intake.offer(line, *batch.figures, batch.arrival);
    return more;
  }
};

}  // namespace

TEST_CASE("a followed file: only complete lines, then growth, rotation and truncation", "[daemon]") {
  Rig rig;
  const std::string path = rig.dir.path("feed.csv");
  FileFollower f(path, 4096, rig.figures);
  CHECK_FALSE(rig.poll(f));  // not there yet: nothing, no error
  CHECK_FALSE(f.is_open());

  append(path, "time,series,count,exposure\n" + row(1, 3) + "1700172800,trap-a,");  // the third line is unfinished
  rig.poll(f);
  CHECK(rig.figures.records == 1);
  const std::uint64_t header_and_one = ("time,series,count,exposure\n" + row(1, 3)).size();
  CHECK(f.consumed() == header_and_one);
  append(path, "4,1\n");
  rig.poll(f);
  CHECK(rig.figures.records == 2);

  // Rotation by rename: the new file is read from its start, header included.
  REQUIRE(std::rename(path.c_str(), (path + ".1").c_str()) == 0);
  append(path, "time,series,count,exposure\n" + row(3, 5) + row(4, 6));
  rig.poll(f);  // notices the rename
  rig.poll(f);  // reads the new file
  CHECK(rig.figures.records == 4);

  // Truncation: shorter than what was read, so read again from byte 0.
  std::ofstream(path, std::ios::trunc) << "time,series,count,exposure\n" << row(5, 2);
  rig.poll(f);
  rig.poll(f);
  CHECK(rig.figures.records == 5);
  CHECK(rig.figures.rejected == 0);
  CHECK(rig.intake.engine().counters().records == 5);
}

TEST_CASE("a followed file resumes at its mark, with the CSV header it had", "[daemon]") {
  Rig rig;
  const std::string path = rig.dir.path("feed.csv");
  append(path, "time,series,count,exposure\n" + row(1, 3) + row(2, 4));
  checkpoint::FileMark mark;
  {
    FileFollower f(path, 4096, rig.figures);
    rig.poll(f);
    mark = f.mark();
  }
  CHECK(mark.format == 0);
  CHECK(mark.header == "time,series,count,exposure");
  CHECK(mark.line == 3);
  append(path, row(3, 5));
  SourceFigures again;
  FileFollower g(path, 4096, again);
  g.resume_from(mark);
  rig.poll(g);
  CHECK(again.records == 1);  // only the new row; the header was not needed again
  CHECK(again.rejected == 0);
}

TEST_CASE("a followed file's batch carries the mark after its last line, and only when it moved", "[daemon]") {
  Rig rig;
  const std::string path = rig.dir.path("feed.csv");
  FileFollower f(path, 4096, rig.figures);
  append(path, "time,series,count,exposure\n" + row(1, 3) + row(2, 4) + "1700259200,trap-a,");
  LineBatch first;
  f.poll(first, 1 << 20);
  REQUIRE(first.mark);
  CHECK(first.figures == &rig.figures);
  CHECK(first.lines.size() == 3);  // the header (a skip) and two records; the unfinished line waits
  CHECK(first.mark->offset == ("time,series,count,exposure\n" + row(1, 3) + row(2, 4)).size());
  CHECK(first.mark->header == "time,series,count,exposure");

  LineBatch idle;  // nothing new: nothing to hand over
  f.poll(idle, 1 << 20);
  CHECK(idle.lines.empty());
  CHECK_FALSE(idle.mark);

  // Truncation: the mark moves back to the start even before a line is read
  // again, so a checkpoint after this batch does not point past the new end.
  std::ofstream(path, std::ios::trunc) << "";
  LineBatch cut;
  f.poll(cut, 1 << 20);
  REQUIRE(cut.mark);
  CHECK(cut.mark->offset == 0);

  // A small budget: the batch stops early and says more is waiting.
  append(path, "time,series,count,exposure\n" + row(1, 3) + row(2, 4) + row(3, 5));
  LineBatch part;
  CHECK(f.poll(part, 8));
  REQUIRE(part.mark);
  CHECK(part.mark->offset == f.consumed());
}
