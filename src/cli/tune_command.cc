// `tallyd tune FEED... --events FILE [--config FILE] [--alphas LIST]
//  [--families LIST] [--windows LIST] [--harmonics LIST]
//  [--max-false-per-year X] [--rows FILE] [--snippet FILE] [--report FILE]`
//
// One replay per model setting collects each judged record's p-values;
// every alpha of the grid is then scored from them (tune/scoring.h says why
// that is exact for the bound detector).
#include <algorithm>
#include <fstream>
#include <iostream>
#include <map>

#include <fmt/format.h>
#include <spdlog/spdlog.h>

#include "cli/command.h"
#include "config/config.h"
#include "feed/feed_merge.h"
#include "replay/replay.h"
#include "report/html_report.h"
#include "report/output_file.h"
#include "report/trace.h"
#include "tune/episodes.h"
#include "tune/grid.h"
#include "tune/progress.h"
#include "tune/recommend.h"
#include "tune/scoring.h"

namespace tallyd::cli {
namespace {

// Newlines in the feed files: an estimate of the records per replay, for the time left.
std::uint64_t count_lines(const std::vector<std::string>& paths) {
  std::uint64_t n = 0;
  char buf[1 << 16];
  for (const std::string& p : paths) {
    std::ifstream in(p, std::ios::binary);
    while (in.read(buf, sizeof buf) || in.gcount() > 0) n += std::count(buf, buf + in.gcount(), '\n');
  }
  return n;
}

class TuneCommand final : public Command {
 public:
  void define(CLI::App& sub) override {
    sub.add_option("feeds", feeds_, "Feed files (CSV with a header row, or JSON Lines); several are merged by time")
        ->required()
        ->check(CLI::ExistingFile);
    sub.add_option("-c,--config", config_path_, "Monitor config (TOML); built-in defaults when omitted")
        ->check(CLI::ExistingFile);
    sub.add_option("-e,--events", events_path_,
                   "Known episodes, CSV series,start,end (RFC 3339); without it only false-alert figures are shown")
        ->check(CLI::ExistingFile);
    sub.add_option("--alphas", alphas_, "Alphas to score, comma-separated (default 1e-2,3e-3,...,1e-5)")
        ->delimiter(',')
        ->check(CLI::Range(1e-300, 0.4999));
    sub.add_option("--families", families_, "Model families to try, comma-separated: poisson, quasipoisson, negbin")
        ->delimiter(',');
    sub.add_option("--windows", windows_, "Training window spans to try, comma-separated durations (e.g. 1y,2y)")
        ->delimiter(',');
    sub.add_option("--harmonics", harmonics_, "Harmonics per season to try, comma-separated (e.g. 1,2,3)")
        ->delimiter(',')
        ->check(CLI::Range(1, 20));
    sub.add_option("--max-false-per-year", max_false_per_year_,
                   "False-alert budget: alerts outside known episodes per series-year (default 2)")
        ->check(CLI::Range(0.0, 1e9));
    sub.add_option("--rows", rows_path_, "Write every scored row to this file: JSON if it ends in .json, else CSV");
    sub.add_option("--snippet", snippet_path_, "Write the recommended config lines (TOML) to this file");
    sub.add_option("--report", report_path_, "Write a self-contained HTML report with the trade-off picture");
    sub.add_option("--max-line-bytes", max_line_bytes_, "Longest feed line accepted, in bytes")
        ->check(CLI::Range(64, 64 * 1024 * 1024));
    sub.add_option("--show", show_rows_, "Rows shown in the terminal table")->check(CLI::Range(1, 100000));
    sub.footer(
        "Replays the history once per model setting, then scores every alpha from the same p-values.\n"
        "Exit status: 0 done (also when no setting meets the budget; the table says so), 1 usage or\n"
        "config error, 2 a feed could not be read.");
  }

  int run() override {
    std::optional<MonitorConfig> loaded_config = value_or_report(load_config_or_defaults(config_path_));
    if (!loaded_config) return kExitUsage;
    const MonitorConfig config = std::move(*loaded_config);
    std::vector<tune::Episode> episodes;
    if (!events_path_.empty()) {
      std::optional<std::vector<tune::Episode>> loaded = value_or_report(tune::load_episodes(events_path_));
      if (!loaded) return kExitUsage;
      episodes = std::move(*loaded);
    }
    std::vector<glm::Family> families;
    for (const std::string& f : families_) {
      auto parsed = glm::parse_family(f);
      if (!parsed) {
        spdlog::error("--families: '{}' is not one of poisson, quasipoisson, negbin", f);
        return kExitUsage;
      }
      families.push_back(*parsed);
    }
    std::vector<Seconds> windows;
    for (const std::string& w : windows_) {
      auto parsed = parse_duration(w);
      if (!parsed) {
        spdlog::error("--windows: {}", parsed.error().message);
        return kExitUsage;
      }
      windows.push_back(*parsed);
    }
    if (alphas_.empty()) alphas_ = tune::default_alphas();
    const std::vector<tune::ModelVariant> variants = tune::expand_grid(families, windows, harmonics_);
    for (const tune::ModelVariant& v : variants)
      if (auto t = tune::apply_variant(config.settings, v, std::nullopt); !t) {
        spdlog::error("{}", t.error().message);
        return kExitUsage;
      }

    const std::uint64_t per_replay = count_lines(feeds_);
    tune::ProgressLine progress(per_replay * (variants.size() + (report_path_.empty() ? 0 : 1)),
                                tune::ProgressLine::stderr_is_terminal());
    std::vector<tune::TuneRow> rows;
    for (std::size_t vi = 0; vi < variants.size(); ++vi) {
      const tune::ModelVariant& v = variants[vi];
      SettingsTable table = std::move(tune::apply_variant(config.settings, v, std::nullopt)).value();
      tune::JudgedLog log;
      std::map<std::string, std::uint32_t> index;
      const std::string stage = fmt::format("setting {}/{} ({})", vi + 1, variants.size(), v.label());
      ReplayOutputs out;
      out.on_rejection = [&, first = vi == 0](const Rejection& r) {
        progress.tick(stage);
        if (first) warn_rejection(r);
      };
      out.on_record = [&](const Observation& obs, const IngestResult& r) {
        progress.tick(stage);
        if (r.kind != IngestResult::Kind::judged || !r.prediction) return;
        auto [it, added] = index.emplace(obs.series, static_cast<std::uint32_t>(log.series_ids.size()));
        if (added) log.series_ids.push_back(obs.series);
        log.records.push_back(tune::JudgedRecord{it->second, obs.time, r.prediction->bounds.p_high,
                                                 r.prediction->bounds.p_low,
                                                 table.for_series(obs.series).alert.direction});
      };
      const int rc = replay_once(table, out, vi == 0);
      if (rc != kExitOk) return rc;
      for (double alpha : alphas_) rows.push_back(tune::TuneRow{v, tune::score_alpha(log, episodes, alpha)});
      engine_.reset();  // it points into `table`, which ends here
    }
    tune::rank_rows(rows, max_false_per_year_);
    const std::optional<std::size_t> chosen = tune::choose_row(rows, max_false_per_year_);

    std::cout << tune::rows_table(rows, max_false_per_year_, show_rows_) << '\n';
    if (episodes.empty())
      std::cout << "No known episodes given: only false-alert figures are meaningful.\n\n";
    std::string snippet;
    if (chosen) {
      snippet = tune::config_snippet(rows[*chosen], max_false_per_year_);
      std::cout << "Recommended (rank 1):\n" << snippet;
    } else {
      std::cout << fmt::format("No setting stays within {:g} false alerts per series-year on this history; "
                               "raise the budget, try other model settings, or review the episodes.\n",
                               max_false_per_year_);
    }
    std::cout.flush();

    if (!rows_path_.empty()) {
      const bool json = rows_path_.size() >= 5 && rows_path_.compare(rows_path_.size() - 5, 5, ".json") == 0;
      const std::string text = json ? tune::rows_json(rows, max_false_per_year_, chosen)
                                    : tune::rows_csv(rows, max_false_per_year_);
      if (auto st = report::write_output_file(rows_path_, text, "the rows file"); !st) {
        spdlog::error("{}", st.error().message);
        return kExitData;
      }
    }
    if (!snippet_path_.empty() && chosen) {
      if (auto st = report::write_output_file(snippet_path_, snippet, "the snippet"); !st) {
        spdlog::error("{}", st.error().message);
        return kExitData;
      }
    }
    if (!report_path_.empty()) return write_report(config, rows, chosen, episodes, progress);
    return kExitOk;
  }

 private:
  void warn_rejection(const Rejection& r) {
    if (shown_ < kShownRejections) spdlog::warn("{}", r.describe());
    if (++shown_ == kShownRejections) spdlog::warn("further refused records are counted but not shown");
  }

  // One replay of every feed with `table`; `summarize` logs the counters.
  int replay_once(const SettingsTable& table, const ReplayOutputs& out, bool summarize, Engine** keep = nullptr) {
    ReadOptions read_options;
    read_options.max_line_bytes = max_line_bytes_;
    auto feeds = FeedSet::open(feeds_, read_options);
    if (!feeds) {
      spdlog::error("{}", feeds.error().message);
      return kExitData;
    }
    engine_ = std::make_unique<Engine>(table, MonitorConfig{}.limits);
    engine_->keep_full_bounds(true);  // scoring needs every record's p-values
    replay_feeds(*feeds, *engine_, out);
    if (summarize) summary_ = describe_counters(engine_->counters(), engine_->series_count());
    if (keep) *keep = engine_.get();
    return kExitOk;
  }

  int write_report(const MonitorConfig& config, const std::vector<tune::TuneRow>& rows,
                   std::optional<std::size_t> chosen, const std::vector<tune::Episode>& episodes,
                   tune::ProgressLine& progress) {
    // The panels show one more replay, with the chosen setting (or the config as it is).
    SettingsTable table = config.settings;
    if (chosen) table = std::move(tune::apply_variant(config.settings, rows[*chosen].variant, rows[*chosen].score.alpha)).value();
    report::TraceCollector traces;
    ReplayOutputs out;
    out.on_rejection = [&](const Rejection&) { progress.tick("report replay"); };
    out.on_record = [&](const Observation& o, const IngestResult& r) {
      progress.tick("report replay");
      traces.add(o, r);
    };
    Engine* engine = nullptr;
    if (const int rc = replay_once(table, out, false, &engine); rc != kExitOk) return rc;
    report::ReportInput in;
    in.title = "tallyd tuning report";
    std::string feed_list;
    for (const std::string& f : feeds_) feed_list += (feed_list.empty() ? "" : ", ") + f;
    in.notes.push_back("feeds: " + feed_list);
    in.notes.push_back("config: " + (config_path_.empty() ? std::string("built-in defaults") : config_path_));
    in.notes.push_back("known episodes: " + (events_path_.empty() ? std::string("none given") : events_path_));
    in.notes.push_back("first model setting's replay (alerts at the configured alpha): " + summary_);
    in.series = traces.finish(*engine);
    in.episodes = episodes;
    in.tune_rows = &rows;
    in.chosen = chosen;
    in.max_false_per_year = max_false_per_year_;
    if (auto st = report::write_output_file(report_path_, report::render_report_html(in), "the report"); !st) {
      spdlog::error("{}", st.error().message);
      return kExitData;
    }
    return kExitOk;
  }

  static constexpr std::uint64_t kShownRejections = 20;
  std::vector<std::string> feeds_;
  std::string config_path_;
  std::string events_path_;
  std::vector<double> alphas_;
  std::vector<std::string> families_;
  std::vector<std::string> windows_;
  std::vector<int> harmonics_;
  double max_false_per_year_ = 2;
  std::string rows_path_;
  std::string snippet_path_;
  std::string report_path_;
  std::size_t max_line_bytes_ = 64 * 1024;
  std::size_t show_rows_ = 15;
  std::uint64_t shown_ = 0;
  std::string summary_;
  std::unique_ptr<Engine> engine_;  // the latest replay's engine (its settings table must outlive it)
};

}  // namespace

std::unique_ptr<Command> make_tune_command() { return std::make_unique<TuneCommand>(); }

}  // namespace tallyd::cli
