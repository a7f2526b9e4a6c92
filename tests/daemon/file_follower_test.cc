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
};

}  // namespace

TEST_CASE("a followed file: only complete lines, then growth, rotation and truncation", "[daemon]") {
  Rig rig;
  const std::string path = rig.dir.path("feed.csv");
  FileFollower f(path, 4096, rig.figures);
  CHECK_FALSE(f.poll(rig.intake, 1 << 20));  // not there yet: nothing, no error
  CHECK_FALSE(f.is_open());

  append(path, "time,series,count,exposure\n" + row(1, 3) + "1700172800,trap-a,");  // the third line is unfinished
  f.poll(rig.intake, 1 << 20);
  CHECK(rig.figures.records == 1);
  const std::uint64_t header_and_one = ("time,series,count,exposure\n" + row(1, 3)).size();
  CHECK(f.consumed() == header_and_one);
  append(path, "4,1\n");
  f.poll(rig.intake, 1 << 20);
  CHECK(rig.figures.records == 2);

  // Rotation by rename: the new file is read from its start, header included.
  REQUIRE(std::rename(path.c_str(), (path + ".1").c_str()) == 0);
  append(path, "time,series,count,exposure\n" + row(3, 5) + row(4, 6));
  f.poll(rig.intake, 1 << 20);  // notices the rename
  f.poll(rig.intake, 1 << 20);  // reads the new file
  CHECK(rig.figures.records == 4);

  // Truncation: shorter than what was read, so read again from byte 0.
  std::ofstream(path, std::ios::trunc) << "time,series,count,exposure\n" << row(5, 2);
  f.poll(rig.intake, 1 << 20);
  f.poll(rig.intake, 1 << 20);
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
    f.poll(rig.intake, 1 << 20);
    mark = f.mark();
  }
  CHECK(mark.format == 0);
  CHECK(mark.header == "time,series,count,exposure");
  CHECK(mark.line == 3);
  append(path, row(3, 5));
  SourceFigures again;
  FileFollower g(path, 4096, again);
  g.resume_from(mark);
  g.poll(rig.intake, 1 << 20);
  CHECK(again.records == 1);  // only the new row; the header was not needed again
  CHECK(again.rejected == 0);
}
