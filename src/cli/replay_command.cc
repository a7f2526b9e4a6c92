// `tallyd replay FEED... [--config FILE] [--alerts FILE] [--rejects FILE]
//  [--report FILE.html [--events FILE]] [--plot-series ID --plot-file FILE.svg]`
#include <algorithm>
#include <fstream>
#include <iostream>

#include <spdlog/spdlog.h>

#include "alert/alert_format.h"
#include "cli/command.h"
#include "config/config.h"
#include "feed/feed_merge.h"
#include "replay/replay.h"
#include "replay/sharded_replay.h"
#include "report/html_report.h"
#include "report/output_file.h"
#include "report/svg_plot.h"
#include "report/trace.h"
#include "tune/episodes.h"

namespace tallyd::cli {
namespace {

class ReplayCommand final : public Command {
 public:
  void define(CLI::App& sub) override {
    sub.add_option("feeds", feeds_, "Feed files (CSV with a header row, or JSON Lines); several are merged by time")
        ->required()
        ->check(CLI::ExistingFile);
    sub.add_option("-c,--config", config_path_, "Monitor config (TOML); built-in defaults when omitted")
        ->check(CLI::ExistingFile);
    sub.add_option("-a,--alerts", alerts_path_,
                   "Write alerts as JSON Lines to this file (default: JSON Lines on standard output)");
    sub.add_option("--rejects", rejects_path_, "Write every refused record, one line each, to this file");
    sub.add_flag("-q,--quiet", quiet_, "Print no alert lines and no summary on the terminal");
    sub.add_option("--max-line-bytes", max_line_bytes_, "Longest feed line accepted, in bytes")
        ->check(CLI::Range(64, 64 * 1024 * 1024));
    sub.add_option("--report", report_path_,
                   "Write a self-contained HTML report (overview, one plot per series, fitted coefficients)");
    sub.add_option("--events", events_path_,
                   "Known episodes (CSV: series,start,end) to shade in the report and the plot")
        ->check(CLI::ExistingFile);
    sub.add_option("--plot-series", plot_series_, "Series whose plot is written with --plot-file");
    sub.add_option("--plot-file", plot_path_,
                   "Write the plot of --plot-series as a standalone SVG (e.g. for rsvg-convert -o plot.png)");
    sub.add_option("--workers", workers_,
                   "Judge the series on this many threads (sharded by series id; the alerts are the same)")
        ->check(CLI::Range(1, 64));
    sub.footer(
        "Each record is judged against its series' model fitted on earlier records only, then learned.\n"
        "Exit status: 0 done (refused records are counted, not fatal), 1 usage or config error,\n"
        "2 a feed could not be read.");
  }

  int run() override {
    std::optional<MonitorConfig> loaded = value_or_report(load_config_or_defaults(config_path_));
    if (!loaded) return kExitUsage;
    const MonitorConfig config = std::move(*loaded);

    ReadOptions read_options;
    read_options.max_line_bytes = max_line_bytes_;
    auto feeds = FeedSet::open(feeds_, read_options);
    if (!feeds) {
      spdlog::error("{}", feeds.error().message);
      return kExitData;
    }

    std::ofstream alerts_file, rejects_file;
    ReplayOutputs out;
    if (!alerts_path_.empty()) {
      alerts_file.open(alerts_path_, std::ios::binary | std::ios::trunc);
      if (!alerts_file) {
        spdlog::error("{}: cannot write the alerts file", alerts_path_);
        return kExitUsage;
      }
      out.alerts_json = &alerts_file;
      if (!quiet_) out.alerts_text = &std::cout;
    } else {
      out.alerts_json = &std::cout;
    }
    if (!rejects_path_.empty()) {
      rejects_file.open(rejects_path_, std::ios::binary | std::ios::trunc);
      if (!rejects_file) {
        spdlog::error("{}: cannot write the rejects file", rejects_path_);
        return kExitUsage;
      }
    }
    std::uint64_t shown = 0;
    out.on_rejection = [&](const Rejection& r) {
      if (rejects_file.is_open()) rejects_file << r.describe() << '\n';
      // The terminal gets the first few; the rest are counted in the summary.
      if (!quiet_ && shown < kShownRejections) spdlog::warn("{}", r.describe());
      if (!quiet_ && ++shown == kShownRejections)
        spdlog::warn("further refused records are counted but not shown{}",
                     rejects_path_.empty() ? " (use --rejects FILE to keep them all)" : "");
    };

    std::vector<tune::Episode> episodes;
    if (!events_path_.empty()) {
      std::optional<std::vector<tune::Episode>> loaded = value_or_report(tune::load_episodes(events_path_));
      if (!loaded) return kExitUsage;
      episodes = std::move(*loaded);
    }
    if (plot_series_.empty() != plot_path_.empty()) {
      spdlog::error("--plot-series and --plot-file go together");
      return kExitUsage;
    }
    report::TraceCollector traces;
    const bool want_traces = !report_path_.empty() || !plot_path_.empty();
    if (want_traces) out.on_record = [&](const Observation& o, const IngestResult& r) { traces.add(o, r); };

    if (workers_ > 1) return run_sharded(config, *feeds, out, alerts_file, want_traces);
    Engine engine(config.settings, config.limits, config.fdr);
    engine.keep_full_bounds(want_traces);  // traces show every record's bounds
    replay_feeds(*feeds, engine, out);
    if (!outputs_written(alerts_file)) return kExitData;
    const std::string summary = describe_counters(engine.counters(), engine.series_count());
    if (!quiet_) spdlog::info("replay: {}", summary);
    if (want_traces) return write_pictures(traces.finish(engine), episodes, summary);
    return kExitOk;
  }

 private:
  // Flushes standard output and the alerts file; false (reported) when the file could not be written.
  bool outputs_written(std::ofstream& alerts_file) const {
    std::cout.flush();
    if (!alerts_file.is_open()) return true;
    alerts_file.flush();
    if (alerts_file) return true;
    spdlog::error("{}: writing the alerts file failed", alerts_path_);
    return false;
  }

  int run_sharded(const MonitorConfig& config, FeedSet& feeds, const ReplayOutputs& out, std::ofstream& alerts_file,
                  bool want_traces) {
    // The shards call ingest directly: the arrival hold and the silence
    // watch (Engine::offer), which keep one clock over all series, are left out.
    bool silence = config.settings.defaults.detect.silence;
    for (const SettingsRule& rule : config.settings.rules) silence = silence || rule.settings.detect.silence;
    const ArrivalSpec& arrival = config.limits.arrival;
    const char* unsupported = config.fdr.enabled ? "the control across series ([fdr] enabled)"
                              : want_traces      ? "--report or --plot-file"
                              : silence          ? "silence watching ([detect] silence)"
                              : arrival.late_tolerance.count() != 0 || arrival.duplicates != DuplicatePolicy::refuse
                                  ? "late or duplicate records ([arrival])"
                                  : nullptr;
    if (unsupported != nullptr) {
      spdlog::error("--workers above 1 does not support {}", unsupported);
      return kExitUsage;
    }
    ShardedEngine engine(config.settings, workers_, config.limits);
    replay_feeds_sharded(feeds, engine, out);
    if (!outputs_written(alerts_file)) return kExitData;
    if (!quiet_) spdlog::info("replay: {}", describe_counters(engine.counters(), engine.series_count()));
    return kExitOk;
  }

  int write_pictures(std::vector<report::SeriesTrace> series, std::vector<tune::Episode> episodes,
                     const std::string& summary) {
    if (!plot_path_.empty()) {
      auto it = std::find_if(series.begin(), series.end(), [&](const auto& t) { return t.id == plot_series_; });
      if (it == series.end()) {
        spdlog::error("--plot-series: no accepted records for series '{}'", plot_series_);
        return kExitData;
      }
      if (auto st = report::write_output_file(plot_path_, report::series_plot_svg(*it, episodes), "the plot"); !st) {
        spdlog::error("{}", st.error().message);
        return kExitData;
      }
    }
    if (report_path_.empty()) return kExitOk;
    report::ReportInput in;
    in.title = "tallyd replay report";
    std::string feed_list;
    for (const std::string& f : feeds_) feed_list += (feed_list.empty() ? "" : ", ") + f;
    in.notes.push_back("feeds: " + feed_list);
    in.notes.push_back("config: " + (config_path_.empty() ? std::string("built-in defaults") : config_path_));
    if (!events_path_.empty()) in.notes.push_back("known episodes: " + events_path_);
    in.notes.push_back(summary);
    in.series = std::move(series);
    in.episodes = std::move(episodes);
    if (auto st = report::write_output_file(report_path_, report::render_report_html(in), "the report"); !st) {
      spdlog::error("{}", st.error().message);
      return kExitData;
    }
    return kExitOk;
  }

  static constexpr std::uint64_t kShownRejections = 20;
  std::vector<std::string> feeds_;
  std::string config_path_;
  std::string alerts_path_;
  std::string rejects_path_;
  std::string report_path_;
  std::string events_path_;
  std::string plot_series_;
  std::string plot_path_;
  std::size_t max_line_bytes_ = 64 * 1024;
  bool quiet_ = false;
  int workers_ = 1;
};

}  // namespace

std::unique_ptr<Command> make_replay_command() { return std::make_unique<ReplayCommand>(); }

}  // namespace tallyd::cli
