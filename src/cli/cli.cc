#include <exception>
#include <iostream>
#include <vector>

#include <spdlog/sinks/stdout_color_sinks.h>
#include <spdlog/spdlog.h>

#include "cli/command.h"

namespace tallyd::cli {
namespace {

struct CommandRow {
  const char* name;
  const char* summary;
  std::unique_ptr<Command> (*make)();
};

// The subcommand table: add a row to add a command.
const CommandRow kCommands[] = {
    {"replay", "Replay feed files in time order exactly as the service would, writing alerts", make_replay_command},
    {"fit", "Fit one series' model and print its coefficients, deviance and AIC", make_fit_command},
    {"serve", "Run as a service: follow files and sockets, judge records as they arrive, checkpoint state", make_serve_command},
    {"tune", "Score alphas and model settings on history against known episodes; recommend one", make_tune_command},
};

}  // namespace

int run_cli(int argc, char** argv) {
  auto logger = spdlog::stderr_color_mt("tallyd");
  logger->set_pattern("%^%l%$: %v");
  spdlog::set_default_logger(logger);

  CLI::App app{"tallyd: watches streams of event counts and flags the unusual ones"};
  app.set_version_flag("--version", std::string("tallyd ") + TALLYD_VERSION);
  app.require_subcommand(1);

  struct Entry {
    CLI::App* sub;
    std::unique_ptr<Command> command;
  };
  std::vector<Entry> entries;
  for (const CommandRow& row : kCommands) {
    Entry e{app.add_subcommand(row.name, row.summary), row.make()};
    e.command->define(*e.sub);
    entries.push_back(std::move(e));
  }

  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    const int code = app.exit(e);
    return code == 0 ? kExitOk : kExitUsage;
  }

  try {
    for (Entry& e : entries)
      if (e.sub->parsed()) return e.command->run();
  } catch (const std::exception& e) {
    spdlog::critical("internal error: {}", e.what());
    return kExitData;
  }
  return kExitUsage;
}

}  // namespace tallyd::cli
