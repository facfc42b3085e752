#pragma once
// Internal to the command line: what every subcommand shares, and one registration function
// per subcommand (each in its own <name>_command.cpp). Adding a command is one line in
// run_cli.cpp: Add<Name>Command(app, context).

#include <filesystem>
#include <functional>
#include <memory>
#include <ostream>
#include <string>
#include <vector>

#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>
#include <spdlog/logger.h>

#include "stepledger/engine/csv.h"
#include "stepledger/engine/share_exchange.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/fit.h"
#include "stepledger/engine/limits.h"
#include "stepledger/run/run_plan.h"
#include "stepledger/cli/validation_text.h"
#include "stepledger/engine/table_scan.h"
#include "stepledger/selection/plan.h"

namespace stepledger::cli {

/// The cores this process may run on (sched_getaffinity), at least 1 and at most 256.
int DefaultThreads();

/// Options every command accepts (CONTRACT.md "Common options").
struct CommonOptions {
  /// Machine-readable JSON on stdout instead of tables. Default: tables.
  bool json = false;
  /// Allow overwriting an output file. Default: refuse.
  bool force = false;
  /// Threads reading the text and folding the factor (>= 1). Default: the cores available to
  /// the process. A compressed file, a pipe or a FIFO is read by one thread (the folds still use
  /// them all).
  int threads = DefaultThreads();
  /// Whether --threads was given (a replay otherwise uses the recorded count).
  bool threads_given = false;
  /// Folder for the typed copy of the rows (--work-dir); empty: the system temporary folder.
  std::string work_dir;
  /// Only results and errors: no notes, no log lines below "error". Default: off.
  bool quiet = false;
  /// trace, debug, info, warn, error, off. Default warn.
  std::string log_level = "warn";
  /// Field separator of the data file: one character, or "tab". Default ",".
  std::string delimiter = ",";
  /// How large the input may be (--limit NAME=N, repeatable; engine/limits.h): the defaults
  /// unless the command line raises or lowers one.
  InputLimits limits;
  /// The --limit texts as given (parsed into limits as they are read).
  std::vector<std::string> limit_texts;
};

/// Checks an option that names an input file: it must exist and not be a folder ("'x.csv'
/// does not exist", "'data' is a folder, not a file"). A FIFO or /dev/stdin passes.
extern const CLI::Validator kExistingInputFile;

/// Checks one input of a command's data (a data file or a data set's folder): it must exist.
/// A FIFO or /dev/stdin passes; which files a folder holds is DataSetFiles' rule.
extern const CLI::Validator kExistingDataInput;

/// A command's DATA inputs as one data set (engine/data_set.h): one file, several files in the
/// order given, or one folder.
DataSet MakeDataSet(const std::vector<std::string>& inputs);

/// The data inputs of a command named in one text for log lines: DescribeDataSet.
std::string DataInputsText(const std::vector<std::string>& inputs);

/// The --help paragraph on data sets, shared by the commands that read one.
inline constexpr const char* kDataSetHelp =
    "DATA may be several files, read one after the other in the order given, or one folder, whose "
    ".csv, .csv.gz, .csv.zst, .tsv, .tsv.gz and .tsv.zst files are read in byte order of their "
    "names (any other entry in it is an error): one data set under one header, which every file "
    "must repeat. The output names the files in their order; record indices (folds, holdout) run "
    "across the set and messages give each file's own lines.\n\n";

/// The help text every command that reads data gives its DATA argument.
inline constexpr const char* kDataInputHelp =
    "CSV data file (header row first), or several files or one folder read as one data set";

/// For a data set (several files or a folder): one line naming its files in reading order, with
/// their rows ("Data set: 3 files, read in this order: a.csv (1,000 rows), ..."); empty for a
/// single file, so that its output is as it always was.
std::string DataSetFilesText(bool is_set, const std::vector<DataFileRecord>& files);
inline std::string DataSetFilesText(const RunResult& run) { return DataSetFilesText(run.data_is_set, run.data_files); }

/// The files a scan read, as RunResult lists them.
std::vector<DataFileRecord> DataFileRecords(const ScanResult& scan);

/// The `files` list of a command's --json `data` for a data set: [{name, bytes, sha256,
/// encoding, rows}] in reading order (the audit's data.files).
nlohmann::json DataFilesJson(const std::vector<DataFileRecord>& files);

/// The --threads, --work-dir and --limit of a command as the engine takes them.
DataReadOptions MakeDataReadOptions(const CommonOptions& common);

/// Shared by the commands during one RunCli call.
struct CommandContext {
  std::ostream& out;
  std::ostream& err;
  CommonOptions common;
  /// Logger writing to err; set up after parsing from --log-level/--quiet.
  std::shared_ptr<spdlog::logger> log;
  /// Set by the chosen subcommand's parse callback; run by RunCli inside its error mapping.
  std::function<int()> action;
  /// stderr without the escaping of err: only for the progress line, whose cursor controls are
  /// meant for the terminal (it escapes the names it shows itself).
  std::ostream* terminal_err = nullptr;
  /// The processes sharing a cluster run (null: this process alone); `select` and `fit` pass it
  /// to RunPlan.
  ShareExchange* shares = nullptr;
};

/// The common options a command can take; a command offers only those it uses.
enum CommonOption : unsigned {
  kJsonOption = 1u << 0,
  kForceOption = 1u << 1,       ///< only commands that write a file
  kThreadsOption = 1u << 2,     ///< only commands that make a factor pass over data
  kQuietOption = 1u << 3,
  kLogLevelOption = 1u << 4,
  kDelimiterOption = 1u << 5,   ///< only commands that read a data file
  kLimitOption = 1u << 6,       ///< only commands that read a data file, a plan or an audit's plan
  kAllCommonOptions = (1u << 7) - 1,
};

/// Adds the chosen options among --json, --force, --threads, --quiet, --log-level,
/// --delimiter and --limit to a subcommand (all of them by default).
void AddCommonOptions(CLI::App& command, CommonOptions& common, unsigned options = kAllCommonOptions);

/// Applies one --limit text ("columns=20000") to limits; returns "" or what is wrong with it.
std::string ApplyLimitText(const std::string& text, InputLimits& limits);

/// --method's value in any case ("Forward"), or InputError naming --method and the choices.
Method ParseMethodOption(const std::string& text);
/// --criterion's value in any case ("AIC"), or InputError naming --criterion and the choices.
Criterion ParseCriterionOption(const std::string& text);

/// The model in words, the way every command states it: "log(resale_price) explained by age,
/// memory, grade, weighted by units"; "y explained by the intercept alone"; "(no intercept)"
/// when the model has none. Never a tilde formula.
std::string ModelStatement(const Design& design, const FitResult& fit);

/// CSV options from the common options (throws InputError naming --delimiter); the header's
/// column limit from --limit columns=N.
CsvOptions MakeCsvOptions(const CommonOptions& common);

/// How the examples in --help and the demo's "Next, try" lines call the program, so that they
/// run as printed: "stepledger" when that name on PATH is this executable (or when this is not a
/// `stepledger` executable, as in tests), else the path this executable was built at, relative
/// to the current folder when it lies inside it ("build/cli/stepledger").
std::string ProgramWord();

/// text on one line (line breaks become spaces): what stderr messages must be.
std::string OneLineText(std::string text);

/// A command's --json output: two-space indentation, keys sorted. Text that is not UTF-8 (a
/// file name given on the command line) is shown with U+FFFD in place of its bad bytes, which
/// JSON cannot hold: data text is refused where it is read (engine/utf8.h), so only names for
/// people reach this.
inline std::string JsonText(const nlohmann::json& value) {
  return value.dump(2, ' ', false, nlohmann::json::error_handler_t::replace);
}

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
