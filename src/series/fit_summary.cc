#include "series/fit_summary.h"

#include <cmath>
#include <limits>

#include <boost/math/distributions/normal.hpp>
#include <boost/math/distributions/students_t.hpp>
#include <fmt/format.h>
#include <nlohmann/json.hpp>

namespace tallyd {
namespace {

double two_sided_p(double stat, bool use_t, int df) {
  if (!std::isfinite(stat)) return std::numeric_limits<double>::quiet_NaN();
  const double a = std::fabs(stat);
  if (use_t && df > 0) return 2 * boost::math::cdf(boost::math::complement(boost::math::students_t(df), a));
  return 2 * boost::math::cdf(boost::math::complement(boost::math::normal(), a));
}

std::string format_p(double p) {
  if (std::isnan(p)) return "-";
  if (p < 1e-16) return "<1e-16";
  return fmt::format("{:.3g}", p);
}

nlohmann::json number_or_null(double v) { return std::isfinite(v) ? nlohmann::json(v) : nlohmann::json(nullptr); }

}  // namespace

FitSummary summarize_fit(std::string series, const ModelSpec& spec, const std::vector<std::string>& names,
                         glm::FitResult fit, std::size_t records, std::string first_time, std::string last_time) {
  FitSummary s;
  s.series = std::move(series);
  s.family = spec.family;
  s.link = spec.link;
  s.records = records;
  s.first_time = std::move(first_time);
  s.last_time = std::move(last_time);
  // Quasi-Poisson estimates its dispersion, so its Wald tests use t on the residual df (as R's summary.glm).
  const bool use_t = spec.family == glm::Family::quasipoisson;
  for (std::size_t j = 0; j < names.size() && static_cast<Eigen::Index>(j) < fit.coefficients.size(); ++j) {
    CoefficientRow row;
    row.name = names[j];
    row.aliased = j < fit.aliased.size() && fit.aliased[j];
    const auto jj = static_cast<Eigen::Index>(j);
    row.estimate = fit.coefficients(jj);
    if (row.aliased) {
      row.std_error = row.statistic = row.p_value = std::numeric_limits<double>::quiet_NaN();
    } else {
      row.std_error = std::sqrt(std::max(0.0, fit.covariance(jj, jj)));
      row.statistic = row.estimate / row.std_error;
      row.p_value = two_sided_p(row.statistic, use_t, fit.df_residual);
    }
    s.coefficients.push_back(row);
  }
  s.fit = std::move(fit);
  return s;
}

std::string fit_text(const FitSummary& s) {
  const glm::FitResult& f = s.fit;
  std::string out = fmt::format("series {}: {} records, {} to {}\n", s.series, s.records, s.first_time, s.last_time);
  out += fmt::format("model: family {}, link {}, exposure as {}\n\n", glm::to_string(s.family), glm::to_string(s.link),
                     s.link == glm::Link::log ? "offset log(exposure)" : "a rate multiplier");
  const char* stat_name = s.family == glm::Family::quasipoisson ? "t" : "z";
  out += fmt::format("{:<24} {:>12} {:>12} {:>9} {:>10}\n", "coefficient", "estimate", "std_error", stat_name, "p");
  for (const CoefficientRow& r : s.coefficients) {
    if (r.aliased) {
      out += fmt::format("{:<24} {:>12} {:>12} {:>9} {:>10}\n", r.name, "aliased", "-", "-", "-");
      continue;
    }
    out += fmt::format("{:<24} {:>12.5g} {:>12.5g} {:>9.3f} {:>10}\n", r.name, r.estimate, r.std_error, r.statistic,
                       format_p(r.p_value));
  }
  out += "\n";
  out += fmt::format("deviance {:.6g} on {} residual df", f.deviance, f.df_residual);
  if (std::isfinite(f.null_deviance)) out += fmt::format(" (null deviance {:.6g})", f.null_deviance);
  out += "\n";
  if (s.family == glm::Family::quasipoisson)
    out += fmt::format("dispersion {:.5g} (Pearson chi-square / df); AIC undefined for a quasi-likelihood\n",
                       f.dispersion);
  else
    out += fmt::format("AIC {:.6g}\n", f.aic);
  if (s.family == glm::Family::negbin) {
    if (f.theta_at_limit)
      out += "theta: no overdispersion found; the maximum-likelihood theta is infinite, so this is the Poisson fit\n";
    else
      out += fmt::format("theta {:.5g} (std error {:.3g})\n", f.theta, f.theta_std_error);
  }
  out += fmt::format("IRLS iterations {}, status {}", f.iterations, glm::to_string(f.status));
  if (!f.note.empty()) out += "; " + f.note;
  out += "\n";
  return out;
}

std::string fit_json(const FitSummary& s) {
  const glm::FitResult& f = s.fit;
  nlohmann::ordered_json j;
  j["series"] = s.series;
  j["family"] = std::string(glm::to_string(s.family));
  j["link"] = std::string(glm::to_string(s.link));
  nlohmann::ordered_json coefs = nlohmann::ordered_json::object();
  for (const CoefficientRow& r : s.coefficients) {
    nlohmann::ordered_json c;
    c["estimate"] = r.aliased ? nlohmann::ordered_json(nullptr) : nlohmann::ordered_json(r.estimate);
    c["std_error"] = number_or_null(r.std_error);
    c["aliased"] = r.aliased;
    coefs[r.name] = c;
  }
  j["coefficients"] = coefs;
  j["deviance"] = number_or_null(f.deviance);
  j["null_deviance"] = number_or_null(f.null_deviance);
  j["aic"] = number_or_null(f.aic);
  j["dispersion"] = number_or_null(f.dispersion);
  j["theta"] = number_or_null(f.theta);
  j["theta_at_limit"] = f.theta_at_limit;
  j["df_residual"] = f.df_residual;
  j["n"] = f.n;
  j["iterations"] = f.iterations;
  j["status"] = std::string(glm::to_string(f.status));
  j["note"] = f.note;
  j["first_time"] = s.first_time;
  j["last_time"] = s.last_time;
  return j.dump(2) + "\n";
}

}  // namespace tallyd
