#include "tune/grid.h"

#include <catch2/catch.hpp>

using namespace tallyd;
using namespace tallyd::tune;

TEST_CASE("expand_grid covers every combination", "[tune]") {
  auto g = expand_grid({glm::Family::poisson, glm::Family::negbin}, {Seconds{86400 * 365}}, {1, 2, 3});
  CHECK(g.size() == 6);
  CHECK(g.front().label() == "family=poisson window=365d harmonics=1");
  CHECK(expand_grid({}, {}, {}).size() == 1);
  CHECK(expand_grid({}, {}, {}).front().label() == "as configured");
}

TEST_CASE("apply_variant reaches the defaults and every rule", "[tune]") {
  SettingsTable base;
  base.defaults.model.seasons.push_back(Season{Seconds{86400 * 7}, 1});
  SettingsRule rule;
  rule.match = "orchard-s*";
  rule.settings.alert.alpha = 0.002;
  rule.settings.model.seasons.push_back(Season{Seconds{86400 * 7}, 3});
  base.rules.push_back(rule);
  ModelVariant v{glm::Family::negbin, Seconds{86400 * 30}, 2};
  auto t = apply_variant(base, v, 1e-4);
  REQUIRE(t);
  CHECK(t->for_series("x").model.family == glm::Family::negbin);
  CHECK(t->for_series("orchard-s1").model.seasons[0].harmonics == 2);
  CHECK(t->for_series("orchard-s1").alert.alpha == 1e-4);
  CHECK(*t->for_series("orchard-s1").model.window.span == Seconds{86400 * 30});
  CHECK(base.rules[0].settings.alert.alpha == 0.002);  // the base is untouched
  SettingsTable plain;
  auto no_seasons = apply_variant(plain, ModelVariant{std::nullopt, std::nullopt, 2}, std::nullopt);
  REQUIRE_FALSE(no_seasons);
  CHECK(no_seasons.error().message.find("--harmonics") == 0);
}
