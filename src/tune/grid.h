// The tuning grid: model settings that need a replay each (family, window,
// harmonics), and the alphas scored from that replay's p-values.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "core/result.h"
#include "series/model_spec.h"

namespace tallyd::tune {

// One model setting. An empty field keeps what the config says.
struct ModelVariant {
  std::optional<glm::Family> family;
  std::optional<Seconds> window;  // the window's span; the record limit is kept
  std::optional<int> harmonics;   // applied to every season of the spec

  // "family=negbin window=3y harmonics=2", or "as configured" when all empty.
  std::string label() const;
};

// Every combination of the given values, families varying slowest. An
// empty list means "as configured" for that setting.
std::vector<ModelVariant> expand_grid(const std::vector<glm::Family>& families, const std::vector<Seconds>& windows,
                                      const std::vector<int>& harmonics);

// `base` with the variant applied to the defaults and to every [[series]]
// rule (tuning must compare like with like across all series), and, when
// `alpha` is given, that alpha for every series too. Fails when harmonics
// are asked for but a series' spec has no seasons.
Result<SettingsTable> apply_variant(const SettingsTable& base, const ModelVariant& v, std::optional<double> alpha);

// Default alpha grid: 1e-2 down to 1e-5 in steps of about half a decade
// (1, 3 per decade).
std::vector<double> default_alphas();

}  // namespace tallyd::tune
