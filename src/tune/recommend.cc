#include "tune/recommend.h"

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include <algorithm>
#include <cmath>
#include <tuple>

namespace tallyd::tune {
namespace {

// Sort key where larger is better and NaN is worst.
double better_high(double x) { return std::isnan(x) ? -1e300 : x; }
double better_low(double x) { return std::isnan(x) ? -1e300 : -x; }

std::string cell(double x) { return std::isnan(x) ? "" : fmt::format("{}", x); }  // shortest round-trip
std::string opt_family(const ModelVariant& v) { return v.family ? std::string(glm::to_string(*v.family)) : ""; }
std::string opt_window(const ModelVariant& v) { return v.window ? format_duration(*v.window) : ""; }
std::string opt_harmonics(const ModelVariant& v) { return v.harmonics ? std::to_string(*v.harmonics) : ""; }

nlohmann::json num(double x) { return std::isnan(x) ? nlohmann::json(nullptr) : nlohmann::json(x); }

}  // namespace

bool within_budget(const TuneRow& row, double max_false_per_year) {
  const double r = row.score.false_per_series_year;
  return std::isnan(r) || r <= max_false_per_year;
}

void rank_rows(std::vector<TuneRow>& rows, double max_false_per_year) {
  const auto key = [&](const TuneRow& r) {
    const Score& s = r.score;
    return std::make_tuple(within_budget(r, max_false_per_year) ? 1 : 0, better_high(s.detection),
                           better_high(s.episode_record_fraction), better_low(s.delay_median_days),
                           better_low(s.false_per_series_year), s.alpha);
  };
  std::stable_sort(rows.begin(), rows.end(), [&](const TuneRow& a, const TuneRow& b) { return key(a) > key(b); });
}

std::optional<std::size_t> choose_row(const std::vector<TuneRow>& ranked, double max_false_per_year) {
  if (ranked.empty() || !within_budget(ranked.front(), max_false_per_year)) return std::nullopt;
  return 0;
}

std::string rows_csv(const std::vector<TuneRow>& rows, double max_false_per_year) {
  std::string out =
      "rank,family,window,harmonics,alpha,judged,alerts,false_alerts,series_years,false_per_series_year,"
      "episodes_listed,episodes_judged,episodes_hit,detection,delay_median_days,delay_p90_days,"
      "episode_records,episode_records_alerted,episode_record_fraction,within_budget\n";
  for (std::size_t i = 0; i < rows.size(); ++i) {
    const Score& s = rows[i].score;
    out += fmt::format("{},{},{},{},{:g},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{}\n", i + 1,
                       opt_family(rows[i].variant), opt_window(rows[i].variant), opt_harmonics(rows[i].variant),
                       s.alpha, s.judged, s.alerts, s.false_alerts, cell(s.series_years),
                       cell(s.false_per_series_year), s.episodes_listed, s.episodes_judged, s.episodes_hit,
                       cell(s.detection), cell(s.delay_median_days), cell(s.delay_p90_days), s.episode_records,
                       s.episode_records_alerted, cell(s.episode_record_fraction),
                       within_budget(rows[i], max_false_per_year) ? "yes" : "no");
  }
  return out;
}

std::string rows_json(const std::vector<TuneRow>& rows, double max_false_per_year, std::optional<std::size_t> chosen) {
  nlohmann::json doc;
  doc["max_false_per_series_year"] = max_false_per_year;
  doc["chosen"] = chosen ? nlohmann::json(*chosen) : nlohmann::json(nullptr);
  nlohmann::json list = nlohmann::json::array();
  for (std::size_t i = 0; i < rows.size(); ++i) {
    const Score& s = rows[i].score;
    const ModelVariant& v = rows[i].variant;
    list.push_back({{"rank", i + 1},
                    {"family", v.family ? nlohmann::json(std::string(glm::to_string(*v.family))) : nlohmann::json(nullptr)},
                    {"window", v.window ? nlohmann::json(format_duration(*v.window)) : nlohmann::json(nullptr)},
                    {"harmonics", v.harmonics ? nlohmann::json(*v.harmonics) : nlohmann::json(nullptr)},
                    {"alpha", s.alpha},
                    {"judged", s.judged},
                    {"alerts", s.alerts},
                    {"false_alerts", s.false_alerts},
                    {"series_years", num(s.series_years)},
                    {"false_per_series_year", num(s.false_per_series_year)},
                    {"episodes_listed", s.episodes_listed},
                    {"episodes_judged", s.episodes_judged},
                    {"episodes_hit", s.episodes_hit},
                    {"detection", num(s.detection)},
                    {"delay_median_days", num(s.delay_median_days)},
                    {"delay_p90_days", num(s.delay_p90_days)},
                    {"episode_records", s.episode_records},
                    {"episode_records_alerted", s.episode_records_alerted},
                    {"episode_record_fraction", num(s.episode_record_fraction)},
                    {"within_budget", within_budget(rows[i], max_false_per_year)}});
  }
  doc["rows"] = std::move(list);
  return doc.dump(1) + "\n";
}

std::string rows_table(const std::vector<TuneRow>& rows, double max_false_per_year, std::size_t limit) {
  const auto fixed = [](double x, int digits) { return std::isnan(x) ? std::string("-") : fmt::format("{:.{}f}", x, digits); };
  std::string out = fmt::format("{:>4} {:<34} {:>8} {:>7} {:>11} {:>9} {:>9} {:>9} {:>9}\n", "rank", "model setting",
                                "alpha", "alerts", "false/s-yr", "episodes", "delay.med", "delay.p90", "ep.recs");
  for (std::size_t i = 0; i < rows.size() && i < limit; ++i) {
    const Score& s = rows[i].score;
    const std::string eps = s.episodes_judged > 0 ? fmt::format("{}/{}", s.episodes_hit, s.episodes_judged) : "-";
    out += fmt::format("{:>4} {:<34} {:>8.0e} {:>7} {:>11}{} {:>9} {:>8}d {:>8}d {:>9}\n", i + 1,
                       rows[i].variant.label(), s.alpha, s.alerts, fixed(s.false_per_series_year, 2),
                       within_budget(rows[i], max_false_per_year) ? " " : "!", eps, fixed(s.delay_median_days, 1),
                       fixed(s.delay_p90_days, 1), fixed(s.episode_record_fraction, 2));
  }
  if (rows.size() > limit) out += fmt::format("  ... {} more rows in the rows file\n", rows.size() - limit);
  out += fmt::format("false/s-yr: alerts outside known episodes per series-year judged ('!' = over the budget of {:g});\n"
                     "episodes: hit/judged; delay: days from episode start to the first alert; ep.recs: fraction of\n"
                     "episode records alerted.\n",
                     max_false_per_year);
  return out;
}

std::string config_snippet(const TuneRow& row, double max_false_per_year) {
  const Score& s = row.score;
  const ModelVariant& v = row.variant;
  std::string out = fmt::format(
      "# Chosen by tallyd tune: best episode detection with at most {:g} false alerts per\n"
      "# series-year on the replayed history ({:.2f} seen; {} of {} judged episodes hit).\n"
      "# A figure on past data, not a promise for future data. Alerts are statistical signals\n"
      "# to confirm in the field; local regulations and licensed practitioners decide.\n"
      "# Tuning applied these values to every series, [[series]] rules included: remove\n"
      "# rule overrides of the same keys to get what was tuned.\n",
      max_false_per_year, std::isnan(s.false_per_series_year) ? 0.0 : s.false_per_series_year, s.episodes_hit,
      s.episodes_judged);
  if (v.family || v.window) {
    out += "[model]\n";
    if (v.family) out += fmt::format("family = \"{}\"\n", glm::to_string(*v.family));
    if (v.window) out += fmt::format("window = \"{}\"\n", format_duration(*v.window));
  }
  if (v.harmonics) out += fmt::format("# and harmonics = {} in every [[model.seasons]] entry\n", *v.harmonics);
  out += fmt::format("[alert]\nalpha = {:g}\n", s.alpha);
  return out;
}

}  // namespace tallyd::tune
