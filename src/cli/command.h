// The subcommand interface: each subcommand is one row of the table in
// cli/cli.cc. A command declares its options on its CLI11 subcommand, then
// runs. Exit codes are shared by all commands.
#pragma once

#include <memory>
#include <optional>
#include <utility>

#include <CLI/CLI.hpp>
#include <spdlog/spdlog.h>

#include "core/result.h"

namespace tallyd::cli {

enum ExitCode : int {
  kExitOk = 0,
  kExitUsage = 1,  // bad command line or config
  kExitData = 2,   // a feed could not be read, or the data cannot answer the question
};

// The value of `r`, or nullopt after logging its error: for the loads a
// command does before its work, whose failure ends the command.
template <class T>
std::optional<T> value_or_report(Result<T> r) {
  if (!r) {
    spdlog::error("{}", r.error().message);
    return std::nullopt;
  }
  return std::optional<T>(std::move(r).value());
}

class Command {
 public:
  virtual ~Command() = default;
  virtual void define(CLI::App& sub) = 0;  // declare options on the subcommand
  virtual int run() = 0;                   // after a successful parse; returns an ExitCode
};

std::unique_ptr<Command> make_replay_command();
std::unique_ptr<Command> make_fit_command();
std::unique_ptr<Command> make_serve_command();
std::unique_ptr<Command> make_tune_command();

// The whole program: parses argv, runs one subcommand, returns the exit code.
// Catches what nothing below expected and reports it as an internal error.
int run_cli(int argc, char** argv);

}  // namespace tallyd::cli
