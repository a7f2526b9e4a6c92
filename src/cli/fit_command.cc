// `tallyd fit FEED... [--series ID] [--config FILE] [flags] [--json | --compare]`
#include <algorithm>
#include <cmath>
#include <iostream>
#include <limits>
#include <set>

#include <fmt/format.h>
#include <spdlog/spdlog.h>

#include "cli/command.h"
#include "config/config.h"
#include "engine/engine.h"
#include "feed/feed_merge.h"
#include "series/design.h"
#include "series/fit_summary.h"

namespace tallyd::cli {
namespace {

struct Fitted {
  FitSummary summary;
  ModelSpec spec;
};

class FitCommand final : public Command {
 public:
  void define(CLI::App& sub) override {
    sub.add_option("feeds", feeds_, "Feed files (CSV or JSON Lines)")->required()->check(CLI::ExistingFile);
    sub.add_option("-s,--series", series_, "Series to fit (may be omitted when the feed holds only one)");
    sub.add_option("-c,--config", config_path_,
                   "Monitor config: the series' model and window as configured (default: intercept + the "
                   "feed's covariate columns, Poisson, log link, all records)")
        ->check(CLI::ExistingFile);
    sub.add_option("--family", family_, "poisson, quasipoisson or negbin");
    sub.add_option("--link", link_, "log, sqrt or identity");
    sub.add_option("--covariates", covariates_, "Comma-separated feed columns to use as covariates")->delimiter(',');
    sub.add_flag("--trend", trend_, "Add a linear trend in years");
    sub.add_option("--season", seasons_, "Seasonal terms as PERIOD:HARMONICS, e.g. 1y:2 (repeatable)");
    auto* json = sub.add_flag("--json", json_, "Print the fit as JSON");
    sub.add_flag("--compare", compare_, "Fit every family/link pair and print a table ranked by AIC")->excludes(json);
  }

  int run() override {
    std::optional<MonitorConfig> loaded = value_or_report(load_config_or_defaults(config_path_));
    if (!loaded) return kExitUsage;
    const MonitorConfig config = std::move(*loaded);
    if (int rc = read_series(); rc != kExitOk) return rc;

    Result<ModelSpec> spec = build_spec(config);
    if (!spec) {
      spdlog::error("{}", spec.error().message);
      return kExitUsage;
    }
    if (compare_) return print_comparison(*spec);

    Fitted f = fit_with(*spec, /*report_rejections=*/true);
    if (f.summary.fit.status == glm::FitStatus::failed) {
      spdlog::error("series {}: the fit failed: {}", series_, f.summary.fit.note);
      return kExitData;
    }
    std::cout << (json_ ? fit_json(f.summary) : fit_text(f.summary));
    return kExitOk;
  }

 private:
  // Collects the chosen series' records (all feeds merged by time).
  int read_series() {
    auto feeds = FeedSet::open(feeds_, ReadOptions{});
    if (!feeds) {
      spdlog::error("{}", feeds.error().message);
      return kExitData;
    }
    std::set<std::string> seen;
    FeedItem item;
    std::uint64_t rejected = 0;
    while (feeds->next(item)) {
      if (!item.is_record()) {
        if (++rejected <= 5) spdlog::warn("{}", item.rejection().describe());
        continue;
      }
      Observation& obs = item.record();
      if (series_.empty() || obs.series == series_) {
        if (series_.empty() && !records_.empty() && obs.series != records_.front().series) {
          seen.insert(obs.series);
          continue;
        }
        records_.push_back(std::move(obs));
      } else {
        seen.insert(obs.series);
      }
    }
    if (rejected > 5) spdlog::warn("{} refused records in all", rejected);
    if (series_.empty()) {
      if (!seen.empty() || records_.empty()) {
        if (!records_.empty()) seen.insert(records_.front().series);
        std::string list;
        for (const std::string& s : seen) {
          if (list.size() > 200) {
            list += ", ...";
            break;
          }
          list += (list.empty() ? "" : ", ") + s;
        }
        spdlog::error("the feed holds {} series; choose one with --series ({})", seen.size(), list);
        return kExitUsage;
      }
      series_ = records_.front().series;
    }
    if (records_.empty()) {
      spdlog::error("no records of series '{}' in the feed", series_);
      return kExitData;
    }
    return kExitOk;
  }

  Result<ModelSpec> build_spec(const MonitorConfig& config) {
    ModelSpec spec;
    if (!config_path_.empty()) {
      spec = config.settings.for_series(series_).model;
    } else {
      spec.family = glm::Family::poisson;
      spec.link = glm::Link::log;
      spec.window = Window{};  // every record
      for (const Covariate& c : records_.front().covariates) spec.covariates.push_back(c.name);
    }
    if (!family_.empty()) {
      auto f = glm::parse_family(family_);
      if (!f) return Error{fmt::format("--family: '{}' is not one of poisson, quasipoisson, negbin", family_)};
      spec.family = *f;
    }
    if (!link_.empty()) {
      auto l = glm::parse_link(link_);
      if (!l) return Error{fmt::format("--link: '{}' is not one of log, sqrt, identity", link_)};
      spec.link = *l;
    }
    if (!covariates_.empty()) spec.covariates = covariates_;
    if (trend_) spec.trend = true;
    if (!seasons_.empty()) spec.seasons.clear();
    for (const std::string& text : seasons_) {
      const auto colon = text.find(':');
      auto period = parse_duration(std::string_view(text).substr(0, colon));
      int harmonics = 1;
      if (colon != std::string::npos) {
        try {
          harmonics = std::stoi(text.substr(colon + 1));
        } catch (const std::exception&) {
          harmonics = 0;
        }
      }
      if (!period || harmonics < 1 || harmonics > 12)
        return Error{fmt::format("--season: '{}' is not PERIOD:HARMONICS like 1y:2 (harmonics 1 to 12)", text)};
      spec.seasons.push_back(Season{*period, harmonics});
    }
    return spec;
  }

  // Runs the records through a learn-only engine (the same ordering and
  // covariate checks as replay), then fits the final window from a cold start.
  Fitted fit_with(const ModelSpec& spec, bool report_rejections) {
    SettingsTable table;
    table.defaults.model = spec;
    table.defaults.model.min_history = std::numeric_limits<std::size_t>::max() / 2;  // never judge, never refit
    Engine engine(table);
    for (const Observation& obs : records_) {
      IngestResult r = engine.ingest(obs);
      if (r.rejection && report_rejections) spdlog::warn("{}", r.rejection->describe());
    }
    const SeriesModel* model = engine.find(series_);
    glm::FitResult fit;
    std::size_t n = 0;
    std::string first, last;
    if (model) {
      fit = model->fit_report();
      n = model->history_size();
      first = format_time(model->first_time_in_window());
      last = format_time(*model->last_time());
    } else {
      fit.note = "no usable records";
    }
    return Fitted{summarize_fit(series_, spec, coefficient_names(spec), std::move(fit), n, first, last), spec};
  }

  int print_comparison(const ModelSpec& base) {
    struct Row {
      glm::Family family;
      glm::Link link;
      glm::FitResult fit;
    };
    std::vector<Row> rows;
    for (glm::Family f : {glm::Family::poisson, glm::Family::negbin, glm::Family::quasipoisson}) {
      for (glm::Link l : {glm::Link::log, glm::Link::sqrt, glm::Link::identity}) {
        ModelSpec spec = base;
        spec.family = f;
        spec.link = l;
        rows.push_back(Row{f, l, fit_with(spec, rows.empty()).summary.fit});
      }
    }
    auto usable_aic = [](const Row& r) { return r.fit.status != glm::FitStatus::failed && std::isfinite(r.fit.aic); };
    double best = std::numeric_limits<double>::infinity();
    for (const Row& r : rows)
      if (usable_aic(r)) best = std::min(best, r.fit.aic);
    // Best AIC first; rows without an AIC (quasi-likelihood, failed fits) last.
    std::stable_sort(rows.begin(), rows.end(), [&](const Row& a, const Row& b) {
      if (usable_aic(a) != usable_aic(b)) return usable_aic(a);
      return usable_aic(a) && a.fit.aic < b.fit.aic;
    });
    std::cout << fmt::format("series {}: {} records; models ranked by AIC (lower is better)\n\n", series_,
                             records_.size());
    std::cout << fmt::format("{:<14} {:<9} {:>12} {:>10} {:>12} {:>6}  {}\n", "family", "link", "AIC", "dAIC",
                             "deviance", "df", "notes");
    for (const Row& r : rows) {
      std::string aic = "-", delta = "-", notes;
      if (usable_aic(r)) {
        aic = fmt::format("{:.3f}", r.fit.aic);
        delta = fmt::format("{:.3f}", r.fit.aic - best);
      }
      if (r.fit.status == glm::FitStatus::failed) {
        notes = "fit failed: " + r.fit.note;
      } else {
        if (r.family == glm::Family::quasipoisson)
          notes = fmt::format("AIC undefined (quasi-likelihood); dispersion {:.3g}", r.fit.dispersion);
        if (r.family == glm::Family::negbin)
          notes = r.fit.theta_at_limit ? "theta infinite: no overdispersion (Poisson limit)"
                                       : fmt::format("theta {:.4g}", r.fit.theta);
        if (r.fit.status == glm::FitStatus::not_converged) notes += (notes.empty() ? "" : "; ") + std::string("not converged");
      }
      const bool failed = r.fit.status == glm::FitStatus::failed;
      const std::string deviance = failed ? "-" : fmt::format("{:.4f}", r.fit.deviance);
      const std::string df = failed ? "-" : std::to_string(r.fit.df_residual);
      std::cout << fmt::format("{:<14} {:<9} {:>12} {:>10} {:>12} {:>6}  {}\n", glm::to_string(r.family),
                               glm::to_string(r.link), aic, delta, deviance, df, notes);
    }
    return kExitOk;
  }

  std::vector<std::string> feeds_;
  std::string series_;
  std::string config_path_;
  std::string family_, link_;
  std::vector<std::string> covariates_;
  std::vector<std::string> seasons_;
  bool trend_ = false;
  bool json_ = false;
  bool compare_ = false;
  std::vector<Observation> records_;
};

}  // namespace

std::unique_ptr<Command> make_fit_command() { return std::make_unique<FitCommand>(); }

}  // namespace tallyd::cli
