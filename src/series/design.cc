#include "series/design.h"

#include <cmath>
#include <numbers>

namespace tallyd {

std::vector<std::string> coefficient_names(const ModelSpec& spec) {
  std::vector<std::string> names{"intercept"};
  if (spec.trend) names.emplace_back("trend");
  for (const Season& s : spec.seasons) {
    const std::string stem = "season_" + format_duration(s.period) + "_";
    for (int k = 1; k <= s.harmonics; ++k) {
      names.push_back(stem + "sin" + std::to_string(k));
      names.push_back(stem + "cos" + std::to_string(k));
    }
  }
  for (const std::string& c : spec.covariates) names.push_back(c);
  return names;
}

int coefficient_count(const ModelSpec& spec) {
  int p = 1 + (spec.trend ? 1 : 0) + static_cast<int>(spec.covariates.size());
  for (const Season& s : spec.seasons) p += 2 * s.harmonics;
  return p;
}

double design_row(const ModelSpec& spec, const DesignInput& in, RowRef row) {
  int j = 0;
  row(j++) = 1.0;
  if (spec.trend) row(j++) = years_between(in.origin, in.time);
  const double epoch = static_cast<double>(in.time.time_since_epoch().count());
  for (const Season& s : spec.seasons) {
    const double period = static_cast<double>(s.period.count());
    // Phase from absolute time, reduced first so the angle stays small and exact.
    const double phase = std::fmod(epoch, period) / period;
    for (int k = 1; k <= s.harmonics; ++k) {
      const double angle = 2.0 * std::numbers::pi * k * phase;
      row(j++) = std::sin(angle);
      row(j++) = std::cos(angle);
    }
  }
  for (std::size_t c = 0; c < spec.covariates.size(); ++c) row(j++) = in.covariates[c];

  switch (spec.link) {
    case glm::Link::log: return std::log(in.exposure);
    case glm::Link::sqrt: row *= std::sqrt(in.exposure); return 0.0;
    case glm::Link::identity: row *= in.exposure; return 0.0;
  }
  return 0.0;
}

}  // namespace tallyd
