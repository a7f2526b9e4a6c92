#include "tune/recommend.h"

#include <catch2/catch.hpp>

using namespace tallyd;
using namespace tallyd::tune;

namespace {
TuneRow row(double alpha, double false_rate, double detection) {
  TuneRow r;
  r.score.alpha = alpha;
  r.score.false_per_series_year = false_rate;
  r.score.detection = detection;
  r.score.episodes_judged = 4;
  r.score.episodes_hit = static_cast<std::uint64_t>(detection * 4);
  return r;
}
}  // namespace

TEST_CASE("ranking puts the best detection within budget first", "[tune]") {
  std::vector<TuneRow> rows{row(1e-2, 9.0, 1.0), row(1e-3, 1.5, 0.75), row(1e-4, 0.2, 0.75), row(1e-5, 0.0, 0.25)};
  rank_rows(rows, 2.0);
  // 1e-3 and 1e-4 detect equally (same record fraction and delay): fewer false alerts wins.
  CHECK(rows[0].score.alpha == 1e-4);
  CHECK(rows[1].score.alpha == 1e-3);
  auto chosen = choose_row(rows, 2.0);
  REQUIRE(chosen);
  CHECK(within_budget(rows[*chosen], 2.0));
  CHECK(rows.back().score.alpha == 1e-2);  // over budget: last
  std::vector<TuneRow> none{row(1e-2, 9.0, 1.0)};
  rank_rows(none, 2.0);
  CHECK_FALSE(choose_row(none, 2.0));
}

TEST_CASE("rows files and snippet carry the chosen values", "[tune]") {
  std::vector<TuneRow> rows{row(1e-3, 1.5, 0.75)};
  rows[0].variant.family = glm::Family::negbin;
  const std::string csv = rows_csv(rows, 2.0);
  CHECK(csv.find("rank,family,window,harmonics,alpha,") == 0);
  CHECK(csv.find("\n1,negbin,,,0.001,") != std::string::npos);
  CHECK(rows_json(rows, 2.0, 0).find("\"chosen\": 0") != std::string::npos);
  const std::string s = config_snippet(rows[0], 2.0);
  CHECK(s.find("family = \"negbin\"") != std::string::npos);
  CHECK(s.find("alpha = 0.001") != std::string::npos);
  CHECK(s.find("licensed practitioners") != std::string::npos);
}
