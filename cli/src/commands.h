#pragma once
// Internal to the command line: what every subcommand shares, and one registration function
// per subcommand (each in its own <name>_command.cpp). Adding a command is one line in
// run_cli.cpp: Add<Name>Command(app, context).

#include <functional>
#include <memory>
#include <ostream>
#include <string>

#include <CLI/CLI.hpp>
#include <spdlog/logger.h>

#include "stepledger/engine/csv.h"

namespace stepledger::cli {

/// Options every command accepts (CONTRACT.md "Common options").
struct CommonOptions {
  /// Machine-readable JSON on stdout instead of tables. Default: tables.
  bool json = false;
  /// Allow overwriting an output file. Default: refuse.
  bool force = false;
  /// Threads folding the factor during a pass over the data (>= 1). Default 1.
  int threads = 1;
  /// Only results and errors: no notes, no log lines below "error". Default: off.
  bool quiet = false;
  /// trace, debug, info, warn, error, off. Default warn.
  std::string log_level = "warn";
  /// Field separator of the data file: one character, or "tab". Default ",".
  std::string delimiter = ",";
};

/// Shared by the commands during one RunCli call.
struct CommandContext {
  std::ostream& out;
  std::ostream& err;
  CommonOptions common;
  /// Logger writing to err; set up after parsing from --log-level/--quiet.
  std::shared_ptr<spdlog::logger> log;
  /// Set by the chosen subcommand's parse callback; run by RunCli inside its error mapping.
  std::function<int()> action;
};

/// Adds --json, --force, --threads, --quiet, --log-level and --delimiter to a subcommand.
void AddCommonOptions(CLI::App& command, CommonOptions& common);

/// CSV options from the common options (throws InputError naming --delimiter).
CsvOptions MakeCsvOptions(const CommonOptions& common);

/// Writes text to a file atomically (refusing to overwrite without --force), or to out when
/// path is "-".
void WriteOutput(CommandContext& context, const std::string& path, const std::string& text);

void AddFitCommand(CLI::App& app, CommandContext& context);
void AddProfileCommand(CLI::App& app, CommandContext& context);
void AddVerifyCommand(CLI::App& app, CommandContext& context);
void AddRerunCommand(CLI::App& app, CommandContext& context);
void AddCompareCommand(CLI::App& app, CommandContext& context);
void AddSelectCommand(CLI::App& app, CommandContext& context);
void AddReportCommand(CLI::App& app, CommandContext& context);
void AddPredictCommand(CLI::App& app, CommandContext& context);
void AddDemoCommand(CLI::App& app, CommandContext& context);

}  // namespace stepledger::cli
