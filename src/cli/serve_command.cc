// `tallyd serve --config FILE [--fresh] [--ports-file FILE]`
#include <spdlog/spdlog.h>

#include "cli/command.h"
#include "daemon/server.h"

namespace tallyd::cli {
namespace {

class ServeCommand final : public Command {
 public:
  void define(CLI::App& sub) override {
    sub.add_option("-c,--config", options_.config_path,
                   "Service config (TOML): [[source]] tables plus the model, alert and limits tables")
        ->required()
        ->check(CLI::ExistingFile);
    sub.add_flag("--fresh", options_.fresh,
                 "Start with no series history: an existing checkpoint is renamed to <path>.set-aside, not loaded");
    sub.add_option("--ports-file", options_.ports_path,
                   "Once bound, write '<source name> <port>' per listener and 'status <port>' to this file");
    sub.footer(
        "Signals: TERM/INT stop after a final checkpoint; HUP reloads the config (a bad one is refused and the\n"
        "running one kept); USR1 reopens the alert logs after rotation.\n"
        "Exit status: 0 stopped cleanly, 1 bad config, unusable checkpoint or a source that cannot be opened.");
  }

  int run() override {
    auto server = daemon::Server::start(options_);
    if (!server) {
      spdlog::error("{}", server.error().message);
      return kExitUsage;
    }
    return (*server)->run();
  }

 private:
  daemon::ServeOptions options_;
};

}  // namespace

std::unique_ptr<Command> make_serve_command() { return std::make_unique<ServeCommand>(); }

}  // namespace tallyd::cli
