#include "tune/grid.h"

#include <fmt/format.h>

namespace tallyd::tune {

std::string ModelVariant::label() const {
  std::string out;
  const auto add = [&](const std::string& part) { out += (out.empty() ? "" : " ") + part; };
  if (family) add(fmt::format("family={}", glm::to_string(*family)));
  if (window) add(fmt::format("window={}", format_duration(*window)));
  if (harmonics) add(fmt::format("harmonics={}", *harmonics));
  return out.empty() ? "as configured" : out;
}

std::vector<ModelVariant> expand_grid(const std::vector<glm::Family>& families, const std::vector<Seconds>& windows,
                                      const std::vector<int>& harmonics) {
  std::vector<std::optional<glm::Family>> fs(families.begin(), families.end());
  std::vector<std::optional<Seconds>> ws(windows.begin(), windows.end());
  std::vector<std::optional<int>> hs(harmonics.begin(), harmonics.end());
  if (fs.empty()) fs.emplace_back();
  if (ws.empty()) ws.emplace_back();
  if (hs.empty()) hs.emplace_back();
  std::vector<ModelVariant> out;
  for (const auto& f : fs)
    for (const auto& w : ws)
      for (const auto& h : hs) out.push_back(ModelVariant{f, w, h});
  return out;
}

namespace {

Status apply_one(SeriesSettings& s, const ModelVariant& v, std::optional<double> alpha, const std::string& where) {
  if (v.family) s.model.family = *v.family;
  if (v.window) s.model.window.span = *v.window;
  if (v.harmonics) {
    if (s.model.seasons.empty())
      return Error{fmt::format("--harmonics: {} has no seasons to set harmonics on", where)};
    for (Season& season : s.model.seasons) season.harmonics = *v.harmonics;
  }
  if (alpha) s.alert.alpha = *alpha;
  return Ok{};
}

}  // namespace

Result<SettingsTable> apply_variant(const SettingsTable& base, const ModelVariant& v, std::optional<double> alpha) {
  SettingsTable out = base;
  if (auto st = apply_one(out.defaults, v, alpha, "the [model] defaults"); !st) return st.error();
  for (SettingsRule& rule : out.rules)
    if (auto st = apply_one(rule.settings, v, alpha, fmt::format("the rule for '{}'", rule.match)); !st)
      return st.error();
  return out;
}

std::vector<double> default_alphas() { return {1e-2, 3e-3, 1e-3, 3e-4, 1e-4, 3e-5, 1e-5}; }

}  // namespace tallyd::tune
