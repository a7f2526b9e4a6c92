// A fitted series model as people read it: coefficient table with standard
// errors, Wald statistics and p-values, plus deviance, AIC and dispersion;
// rendered as a text table or as JSON.
#pragma once

#include <string>
#include <vector>

#include "glm/fit.h"
#include "series/model_spec.h"

namespace tallyd {

struct CoefficientRow {
  std::string name;
  double estimate = 0;
  double std_error = 0;  // NaN when aliased
  double statistic = 0;  // z (Poisson, negbin) or t (quasi-Poisson, on df_residual)
  double p_value = 1;    // two-sided
  bool aliased = false;
};

struct FitSummary {
  std::string series;
  glm::Family family = glm::Family::poisson;
  glm::Link link = glm::Link::log;
  std::size_t records = 0;
  std::string first_time, last_time;  // RFC 3339 span of the fitted window
  std::vector<CoefficientRow> coefficients;
  glm::FitResult fit;
};

// Builds the table; `names` has one entry per column of the fit.
FitSummary summarize_fit(std::string series, const ModelSpec& spec, const std::vector<std::string>& names,
                         glm::FitResult fit, std::size_t records, std::string first_time, std::string last_time);

std::string fit_text(const FitSummary& s);
// {"series", "family", "link", "coefficients": {NAME: {"estimate","std_error"}}, "deviance",
//  "null_deviance", "aic" (null if undefined), "dispersion", "theta" (null if infinite),
//  "theta_at_limit", "df_residual", "n", "iterations", "status", "note"}
std::string fit_json(const FitSummary& s);

}  // namespace tallyd
