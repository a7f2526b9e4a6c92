#include "series/design.h"

#include <cmath>
#include <cstdint>
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

int season_column_count(const ModelSpec& spec) {
  int n = 0;
  for (const Season& s : spec.seasons) n += 2 * s.harmonics;
  return n;
}

void season_columns(const ModelSpec& spec, TimePoint time, double* out) {
  int j = 0;
  const std::int64_t epoch = time.time_since_epoch().count();
  for (const Season& s : spec.seasons) {
    const std::int64_t period = s.period.count();
    // Phase from absolute time, reduced first so the angle stays small and
    // exact: the integer remainder (its sign the dividend's, as fmod's) is
    // what fmod of the two as doubles gives, in one division.
    const double phase = static_cast<double>(period != 0 ? epoch % period : 0) / static_cast<double>(period);
    for (int k = 1; k <= s.harmonics; ++k) {
      const double angle = 2.0 * std::numbers::pi * k * phase;
      out[j++] = std::sin(angle);
      out[j++] = std::cos(angle);
    }
  }
}

double design_row(const ModelSpec& spec, const DesignInput& in, const double* seasons, RowRef row) {
  int j = 0;
  row(j++) = 1.0;
  if (spec.trend) row(j++) = years_between(in.origin, in.time);
  const int n_seasons = season_column_count(spec);
  for (int c = 0; c < n_seasons; ++c) row(j++) = seasons[c];
  for (std::size_t c = 0; c < spec.covariates.size(); ++c) row(j++) = in.covariates[c];

  switch (spec.link) {
    case glm::Link::log: return std::log(in.exposure);
    case glm::Link::sqrt: row *= std::sqrt(in.exposure); return 0.0;
    case glm::Link::identity: row *= in.exposure; return 0.0;
  }
  return 0.0;
}

double design_row(const ModelSpec& spec, const DesignInput& in, RowRef row) {
  // Seasonal columns on the stack for the usual few harmonics.
  constexpr int kOnStack = 32;
  const int n_seasons = season_column_count(spec);
  if (n_seasons <= kOnStack) {
    double seasons[kOnStack];
    season_columns(spec, in.time, seasons);
    return design_row(spec, in, seasons, row);
  }
  std::vector<double> seasons(static_cast<std::size_t>(n_seasons));
  season_columns(spec, in.time, seasons.data());
  return design_row(spec, in, seasons.data(), row);
}

}  // namespace tallyd
