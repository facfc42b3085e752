// The composition root: parses the command line with CLI11, runs the chosen command and maps
// every outcome to the exit statuses of CONTRACT.md.

#include "stepledger/cli/run_cli.h"
#include "stepledger/cli/printable_text.h"

#include <sched.h>

#include <algorithm>
#include <charconv>
#include <system_error>
#include <thread>
#include <cctype>
#include <cstdlib>
#include <filesystem>
#include <string_view>
#include <exception>
#include <functional>
#include <new>
#include <stdexcept>
#include <sstream>

#include <CLI/CLI.hpp>
#include <spdlog/sinks/ostream_sink.h>
#include <spdlog/spdlog.h>

#include "commands.h"
#include "stepledger/audit/audit_document.h"
#include "stepledger/report/report.h"
#include "stepledger/io/atomic_file.h"
#include "stepledger/engine/errors.h"
#include "stepledger/run/run_plan.h"
#include "stepledger/engine/limits.h"
#include "stepledger/engine/notice.h"
#include "stepledger/engine/number_format.h"

#ifndef STEPLEDGER_VERSION
#define STEPLEDGER_VERSION "unknown"
#endif

namespace stepledger {
namespace cli {

void AddCommonOptions(CLI::App& command, CommonOptions& common, unsigned options) {
  if (options & kJsonOption) {
    command.add_flag("--json", common.json, "Machine-readable JSON on stdout instead of tables");
  }
  if (options & kForceOption) {
    command.add_flag("--force", common.force, "Allow overwriting an existing output file");
  }
  if (options & kThreadsOption) {
    command
        .add_option_function<int>(
            "--threads",
            [&common](int threads) {
              common.threads = threads;
              common.threads_given = true;
            },
            "Threads reading the data file (in byte ranges cut at record boundaries) and folding "
            "the factor; default: the cores available (" + std::to_string(DefaultThreads()) +
                " here). A compressed file, a pipe or a FIFO is read by one thread; the same count "
                "on the same file gives the same numbers to the last bit")
        ->check(CLI::Range(1, 256))
        ->type_name("N");
    command
        .add_option("--work-dir", common.work_dir,
                    "Folder for the typed copy of the rows that every pass after the first reads "
                    "(about 8 bytes per cell; removed at the end, on error and on Ctrl-C); default: "
                    "the system temporary folder ($TMPDIR or /tmp)")
        ->type_name("DIR");
  }
  if (options & kQuietOption) command.add_flag("--quiet", common.quiet, "Print only results and errors");
  if (options & kLogLevelOption) {
    command.add_option("--log-level", common.log_level, "Log detail on stderr")
        ->check(CLI::IsMember({"trace", "debug", "info", "warn", "error", "off"}))
        ->type_name("LEVEL");
  }
  if (options & kDelimiterOption) {
    command.add_option("--delimiter", common.delimiter,
                       "Field separator of the data file: one character, or 'tab'")
        ->type_name("CHAR");
  }
  if (options & kLimitOption) {
    const InputLimits defaults;
    std::string names;
    for (const LimitKind limit : kAllLimitKinds) {
      names += std::string(names.empty() ? "" : ", ") + ToString(limit) + " (" +
               FormatCount(static_cast<std::int64_t>(defaults.Get(limit))) + ")";
    }
    command
        .add_option("--limit", common.limit_texts,
                    "Raise (or lower) a limit on the size of the input, NAME=N; repeat for several. "
                    "NAME (default): " + names + ". An input over a limit is refused before the work "
                    "(exit 2); see 'Limits' in the README")
        ->type_name("NAME=N")
        ->default_str("")
        ->allow_extra_args(false)
        ->check(CLI::Validator(
            [](std::string& text) {
              InputLimits unused;
              return ApplyLimitText(text, unused);
            },
            ""))
        ->each([&common](const std::string& text) { ApplyLimitText(text, common.limits); });
  }
}

std::string ApplyLimitText(const std::string& text, InputLimits& limits) {
  std::string names;
  for (const LimitKind limit : kAllLimitKinds) names += std::string(names.empty() ? "" : ", ") + ToString(limit);
  const std::size_t equals = text.find('=');
  const auto limit = LimitKindFromString(std::string_view(text).substr(0, equals));
  if (equals == std::string::npos || !limit) {
    return "expected NAME=N with NAME one of " + names + ", found '" + QuoteForMessage(text) + "'";
  }
  const std::string number = text.substr(equals + 1);
  std::uint64_t value = 0;
  const auto [end, error] = std::from_chars(number.data(), number.data() + number.size(), value);
  if (number.empty() || error != std::errc() || end != number.data() + number.size() || value == 0) {
    return std::string("expected a whole number >= 1 after '") + ToString(*limit) + "=', found '" +
           QuoteForMessage(number) + "'";
  }
  limits.Set(*limit, value);
  return "";
}

int DefaultThreads() {
  cpu_set_t set;
  CPU_ZERO(&set);
  int cores = 0;
  if (sched_getaffinity(0, sizeof set, &set) == 0) cores = CPU_COUNT(&set);
  if (cores < 1) cores = static_cast<int>(std::thread::hardware_concurrency());
  return std::clamp(cores, 1, 256);
}

const CLI::Validator kExistingInputFile(
    [](std::string& path) -> std::string {
      std::error_code error;
      const std::filesystem::file_status status = std::filesystem::status(path, error);
      if (status.type() == std::filesystem::file_type::not_found) return "'" + path + "' does not exist";
      if (error) return "'" + path + "' cannot be examined: " + error.message();
      if (std::filesystem::is_directory(status)) return "'" + path + "' is a folder, not a file";
      return {};
    },
    "FILE");

const CLI::Validator kExistingDataInput(
    [](std::string& path) -> std::string {
      std::error_code error;
      const std::filesystem::file_status status = std::filesystem::status(path, error);
      if (status.type() == std::filesystem::file_type::not_found) return "'" + path + "' does not exist";
      if (error) return "'" + path + "' cannot be examined: " + error.message();
      return {};
    },
    "FILE|FOLDER");

DataSet MakeDataSet(const std::vector<std::string>& inputs) {
  std::vector<std::filesystem::path> paths(inputs.begin(), inputs.end());
  return DataSet(std::move(paths));
}

std::string DataInputsText(const std::vector<std::string>& inputs) { return DescribeDataSet(MakeDataSet(inputs)); }

std::vector<DataFileRecord> DataFileRecords(const ScanResult& scan) {
  std::vector<DataFileRecord> files;
  for (const ScannedFile& file : scan.files) {
    files.push_back(DataFileRecord{file.path.filename().string(), file.stored_bytes, file.sha256, file.encoding, file.rows});
  }
  return files;
}

std::string DataSetFilesText(bool is_set, const std::vector<DataFileRecord>& files) {
  if (!is_set) return {};
  std::string text = "Data set: " + std::to_string(files.size()) +
                     (files.size() == 1 ? " file" : " files") + ", read in this order: ";
  for (std::size_t i = 0; i < files.size(); ++i) {
    const DataFileRecord& file = files[i];
    text += (i == 0 ? "" : ", ") + file.name + " (" + FormatCount(static_cast<std::int64_t>(file.rows)) +
            (file.rows == 1 ? " row)" : " rows)");
  }
  return text + "\n";
}

nlohmann::json DataFilesJson(const std::vector<DataFileRecord>& files) {
  nlohmann::json list = nlohmann::json::array();
  for (const DataFileRecord& file : files) {
    list.push_back({{"name", file.name},
                    {"bytes", file.bytes},
                    {"sha256", file.sha256},
                    {"encoding", file.encoding},
                    {"rows", file.rows}});
  }
  return list;
}

DataReadOptions MakeDataReadOptions(const CommonOptions& common) {
  DataReadOptions options;
  options.threads = common.threads;
  options.work_dir = common.work_dir;
  options.limits = common.limits;
  return options;
}

std::string OneLineText(std::string text) {
  std::replace(text.begin(), text.end(), '\n', ' ');
  std::replace(text.begin(), text.end(), '\r', ' ');
  while (!text.empty() && text.back() == ' ') text.pop_back();
  return text;
}

std::string ProgramWord() {
  namespace fs = std::filesystem;
  std::error_code error;
  const fs::path self = fs::read_symlink("/proc/self/exe", error);
  if (error || self.filename() != "stepledger") return "stepledger";
  if (const char* path = std::getenv("PATH")) {
    std::string_view folders = path;
    while (!folders.empty()) {
      const std::size_t colon = folders.find(':');
      const fs::path folder(std::string(folders.substr(0, colon)));
      folders = colon == std::string_view::npos ? std::string_view() : folders.substr(colon + 1);
      if (folder.empty()) continue;
      const fs::path candidate = folder / "stepledger";
      if (fs::exists(candidate, error) && fs::equivalent(candidate, self, error)) return "stepledger";
    }
  }
  const fs::path here = fs::current_path(error);
  if (!error) {
    const fs::path relative = self.lexically_relative(here);
    if (!relative.empty() && *relative.begin() != "..") return relative.string();
  }
  return self.string();
}

namespace {
std::string Lowercase(std::string text) {
  for (char& c : text) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  return text;
}
}  // namespace

Method ParseMethodOption(const std::string& text) {
  const auto method = MethodFromString(Lowercase(text));
  if (!method) {
    throw InputError("--method: unknown method '" + QuoteForMessage(text) +
                     "'; use forward, backward, stepwise, all-subsets or none (any case)");
  }
  return *method;
}

Criterion ParseCriterionOption(const std::string& text) {
  const auto criterion = CriterionFromString(Lowercase(text));
  if (!criterion) {
    throw InputError("--criterion: unknown criterion '" + QuoteForMessage(text) +
                     "'; use adj-r2, aic, aicc, bic, cp, partial-f or cv (any case)");
  }
  return *criterion;
}

std::string ModelStatement(const Design& design, const FitResult& fit) {
  std::string text = design.response_transform == ResponseTransform::kLog
                         ? "log(" + design.response + ")"
                         : design.response;
  text += " explained by ";
  if (fit.terms.empty()) {
    text += fit.intercept ? "the intercept alone" : "nothing (no intercept, no terms)";
  } else {
    for (std::size_t i = 0; i < fit.terms.size(); ++i) text += (i > 0 ? ", " : "") + fit.terms[i];
    if (!fit.intercept) text += " (no intercept)";
  }
  if (design.weights) text += ", weighted by " + *design.weights;
  return text;
}

CsvOptions MakeCsvOptions(const CommonOptions& common) {
  CsvOptions csv;
  if (common.delimiter == "tab" || common.delimiter == "\\t") {
    csv.delimiter = '\t';
  } else if (common.delimiter.size() == 1) {
    csv.delimiter = common.delimiter[0];
  } else {
    throw InputError("--delimiter: expected one character or 'tab', got '" +
                     QuoteForMessage(common.delimiter) + "'");
  }
  csv.max_columns = common.limits.columns;
  csv.Validate();
  return csv;
}

void WriteOutput(CommandContext& context, const std::string& path, const std::string& text) {
  if (path == "-") {
    context.out << text;
    return;
  }
  WriteFileAtomically(path, text, AtomicWriteOptions{.overwrite = context.common.force});
  if (context.log) context.log->info("wrote {}", path);
}

namespace {

std::shared_ptr<spdlog::logger> MakeLogger(std::ostream& err, const CommonOptions& common) {
  auto sink = std::make_shared<spdlog::sinks::ostream_sink_st>(err, /*force_flush=*/true);
  sink->set_pattern("stepledger %l: %v");
  auto logger = std::make_shared<spdlog::logger>("stepledger", sink);
  spdlog::level::level_enum level = spdlog::level::from_str(common.log_level);
  if (common.quiet) level = std::max(level, spdlog::level::err);
  logger->set_level(level);
  return logger;
}


}  // namespace
}  // namespace cli

int RunCli(const std::vector<std::string>& args, std::ostream& out, std::ostream& raw_err) {
  return RunCli(args, out, raw_err, nullptr);
}

int RunCli(const std::vector<std::string>& args, std::ostream& out, std::ostream& raw_err, ShareExchange* shares) {
  using cli::CommandContext;
  // The commands that run a plan (select, fit, and the replays of verify --data and rerun) share
  // their data among the processes of a cluster run; any other command is process 0's alone.
  if (shares != nullptr && shares->count() > 1) {
    const bool shared_command =
        !args.empty() && (args[0] == "select" || args[0] == "fit" || args[0] == "verify" || args[0] == "rerun");
    if (!shared_command) {
      if (shares->index() > 0) return static_cast<int>(ExitStatus::kDone);
      shares = nullptr;
    }
  }
  // Messages quote file names, column names, levels and JSON values: escape what a terminal
  // would act on (printable_text.h).
  PrintableTextStream err(raw_err);
  CommandContext context{out, err, {}, nullptr, {}, &raw_err, shares};

  CLI::App app{
      "stepledger chooses the terms of a linear pricing or valuation model and records every "
      "step of the choice in a tamper-evident audit file.",
      "stepledger"};
  app.set_version_flag("--version", std::string("stepledger ") + STEPLEDGER_VERSION);
  app.option_defaults()->always_capture_default();
  app.get_formatter()->column_width(34);
  app.require_subcommand(1);
  app.footer(
      "Run 'stepledger COMMAND --help' for a command's options. New here? 'stepledger demo' "
      "makes an invented data set, selects a model on it and names the commands to try next.");

  cli::AddFitCommand(app, context);
  cli::AddProfileCommand(app, context);
  cli::AddVerifyCommand(app, context);
  cli::AddRerunCommand(app, context);
  cli::AddCompareCommand(app, context);
  cli::AddSelectCommand(app, context);
  cli::AddReportCommand(app, context);
  cli::AddPredictCommand(app, context);
  cli::AddDemoCommand(app, context);

  // A first word that is no command would otherwise be reported as "a subcommand is required".
  if (args.empty()) {
    err << "stepledger: no command given (see 'stepledger --help')\n";
    return static_cast<int>(ExitStatus::kBadInput);
  }
  const std::vector<CLI::App*> commands_known = app.get_subcommands([](CLI::App*) { return true; });
  const bool first_is_command = !args.empty() && std::any_of(commands_known.begin(), commands_known.end(),
                                                              [&](CLI::App* command) { return command->check_name(args[0]); });
  if (!args.empty() && !args[0].empty() && args[0][0] != '-' && !first_is_command) {
    std::string commands;
    for (const CLI::App* command : commands_known) commands += (commands.empty() ? "" : ", ") + command->get_name();
    err << "stepledger: '" << cli::OneLineText(args[0]) << "' is not a command; the commands are " << commands
        << " (see 'stepledger --help')\n";
    return static_cast<int>(ExitStatus::kBadInput);
  }
  // CLI11 takes the arguments in reverse order.
  std::vector<std::string> reversed(args.rbegin(), args.rend());
  try {
    app.parse(reversed);
  } catch (const CLI::CallForHelp&) {
    out << app.help();
    return static_cast<int>(ExitStatus::kDone);
  } catch (const CLI::CallForAllHelp&) {
    out << app.help("", CLI::AppFormatMode::All);
    return static_cast<int>(ExitStatus::kDone);
  } catch (const CLI::CallForVersion& version) {
    out << version.what() << "\n";
    return static_cast<int>(ExitStatus::kDone);
  } catch (const CLI::ParseError& error) {
    // A subcommand's --help arrives here too (CallForHelp is raised from the subcommand).
    if (error.get_exit_code() == 0) {
      std::ostringstream help;
      app.exit(error, help, err);
      out << help.str();
      return static_cast<int>(ExitStatus::kDone);
    }
    err << "stepledger: " << cli::OneLineText(error.what()) << " (see 'stepledger --help')\n";
    return static_cast<int>(ExitStatus::kBadInput);
  }

  if (!context.action) {
    err << "stepledger: no command given (see 'stepledger --help')\n";
    return static_cast<int>(ExitStatus::kBadInput);
  }
  return RunCommandAction(
      [&context, &err] {
        context.log = cli::MakeLogger(err, context.common);
        // The engine's notes (a pass on fewer threads than asked) are warnings of this command.
        struct NoticesToLog {
          NoticeSink previous;
          ~NoticesToLog() { SetNoticeSink(std::move(previous)); }
        } notices{SetNoticeSink([log = context.log](std::string_view line) { log->warn("{}", line); })};
        return context.action();
      },
      err);
}

int RunCommandAction(const std::function<int()>& action, std::ostream& err) {
  try {
    return action();
  } catch (const ShareServed&) {
    return static_cast<int>(ExitStatus::kDone);
  } catch (const LimitError& error) {
    // The limits are the command line's: say how to raise the one that refused.
    err << "stepledger: " << cli::OneLineText(error.what()) << "; to allow more, add --limit "
        << ToString(error.limit()) << "=N\n";
    return static_cast<int>(ExitStatus::kBadInput);
  } catch (const InputError& error) {  // PlanError is an InputError
    err << "stepledger: " << cli::OneLineText(error.what()) << "\n";
    return static_cast<int>(ExitStatus::kBadInput);
  } catch (const NumericalError& error) {
    err << "stepledger: numerical failure: " << cli::OneLineText(error.what()) << "\n";
    return static_cast<int>(ExitStatus::kFailure);
  } catch (const ResourceError& error) {
    err << "stepledger: " << cli::OneLineText(error.what()) << "\n";
    return static_cast<int>(ExitStatus::kFailure);
  } catch (const std::bad_alloc&) {
    // Memory ran out (a limit such as `ulimit -v`, or more than the machine has): not a bug.
    err << "stepledger: out of memory: a memory limit (such as ulimit -v) or the machine's memory was "
           "reached; raise the limit, or use fewer --threads\n";
    return static_cast<int>(ExitStatus::kFailure);
  } catch (const std::logic_error& error) {
    // A broken internal rule (std::invalid_argument and friends too): a bug, never the
    // user's input, so it never exits 2.
    err << "stepledger: internal error (a bug; please report it): " << cli::OneLineText(error.what())
        << "\n";
    return static_cast<int>(ExitStatus::kFailure);
  } catch (const std::exception& error) {
    err << "stepledger: internal error: " << cli::OneLineText(error.what()) << "\n";
    return static_cast<int>(ExitStatus::kFailure);
  } catch (...) {
    err << "stepledger: internal error: an exception that is not a std::exception\n";
    return static_cast<int>(ExitStatus::kFailure);
  }
}

}  // namespace stepledger
