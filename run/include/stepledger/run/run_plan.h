#pragma once
// One run of a plan on a data file, composed once for every command (DESIGN.md §8):
// one scan of the text (profile, fingerprint over the bytes as stored, typed spill; parallel
// over byte ranges) -> design -> factor pass over the spill -> search -> refined fit of the
// final model -> diagnostics pass (which also learns what pricing new rows needs), every pass
// after the scan reading the spill, never the text.
// `fit` (method "none", no audit), `select`, `verify --data` and `rerun` all run through RunPlan,
// so a replay takes the very path the recorded run took. The result is one typed value that the
// audit, the report and the terminal output render; none of them recomputes it.

#include <cstdint>
#include <exception>
#include <filesystem>
#include <optional>
#include <string>

#include "stepledger/engine/csv.h"
#include "stepledger/engine/data_set.h"
#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/fit.h"
#include "stepledger/engine/model_support.h"
#include "stepledger/engine/profile.h"
#include "stepledger/engine/share_exchange.h"
#include "stepledger/io/plan_file.h"
#include "stepledger/run/validation.h"
#include "stepledger/selection/search.h"

namespace stepledger {

/// How a plan is run. Every field is recorded in the audit's `settings`, so that a replay runs
/// the same way.
struct RunOptions {
  /// Delimiter and block size of the reader; the missing tokens always come from the plan.
  CsvOptions csv;
  /// Threads reading the text and folding the factor (>= 1). Default 1 (the command line's
  /// default is the cores available). Different counts agree to rounding only; the same count
  /// on the same file gives the same bits.
  int threads = 1;
  /// Where the typed spill's private folder is made (empty: the system temporary folder). Not
  /// recorded: it cannot change a result.
  std::filesystem::path work_dir;
  /// How large the data and the design may be (engine/limits.h): the scan's column count
  /// (csv.max_columns is set from it) and levels kept per column, the terms and design columns
  /// of BuildDesign. Not recorded: a limit refuses a run, it cannot change one.
  InputLimits limits;
  /// Confidence level, refinement and the kernel's alias tolerance of the final fit.
  FitOptions fit;
  /// VIF above which a final-model coefficient is named in the collinearity caution
  /// (common practice: 10).
  double vif_caution = 10;
  /// Run the per-row diagnostics pass of the final model (one more pass over the rows): the
  /// leverage, Cook's distance and residual summaries, the term ranges over the rows used and the
  /// largest leverage (for predict and the extrapolation caution). Default: yes.
  bool diagnostics = true;
  /// Several processes sharing the run (a cluster run under mpirun; engine/share_exchange.h), or
  /// null for a run of this process alone. Every process calls RunPlan with the same plan and
  /// options; process 0 returns the result, the others throw ShareServed once process 0 no
  /// longer needs them (run/src/shared_run.h). Not recorded in the settings (it cannot change a
  /// result beyond rounding); the audit's `cluster` section names the processes and the layout.
  ShareExchange* shares = nullptr;
  /// Throws InputError naming the field when a value is out of range.
  void Validate() const;
};

/// One file of a data set as the audit lists it.
struct DataFileRecord {
  std::string name;                ///< the file's name (no folder)
  std::uint64_t bytes = 0;         ///< as stored
  std::string sha256;              ///< its own fingerprint (engine/fingerprint.h)
  std::string encoding = "plain";  ///< plain, gzip or zstd
  std::uint64_t rows = 0;          ///< data records it holds
};

/// Everything one run produced.
struct RunResult {
  LoadedPlan plan;
  std::string data_file_name;       ///< DataSetFileName: the file's name (no folder), for readers
  std::string data_sha256;          ///< the fingerprint of the file, or of the set (engine/data_set.h)
  std::uint64_t data_bytes = 0;    ///< bytes of the files as stored
  std::string data_encoding = "plain";  ///< plain, gzip or zstd ("mixed" for a set of several)
  /// True when the data were given as several files or a folder: the audit then lists data_files.
  bool data_is_set = false;
  /// The files read, in reading order (one for a single file; none for data in memory).
  std::vector<DataFileRecord> data_files;
  /// The data were columns in memory (DataSet::columns, engine/column_source.h): data_sha256 is
  /// the fingerprint of their canonical binary form; the audit records data.source "memory".
  bool data_in_memory = false;
  DataProfile profile;
  Design design;
  RowAccounting accounting;
  SearchResult search;
  FitResult fit;
  std::optional<double> max_leverage;  ///< from the diagnostics pass, when run
  std::uint64_t max_leverage_line = 0;
  std::size_t max_leverage_file = 0;  ///< its file in data_files (a data set's lines restart per file)
  /// What pricing new rows needs (ranges, largest unit leverage, smearing factor); filled by
  /// the diagnostics pass, empty without it.
  PredictionSupport prediction_support;
  /// The diagnostics of the final model (a bounded summary), when the diagnostics pass ran.
  std::optional<DiagnosticsResult> diagnostics;
  /// The final model's k-fold error, and the holdout and bootstrap results the plan asks for.
  ValidationResult validation;
  RunOptions options;
  double duration_seconds = 0;      ///< wall time of the run
  /// The processes that read the data (1 without RunOptions::shares) and how they shared it, in
  /// words ("3 processes, 2 byte ranges each of every plain file; compressed files whole"), for
  /// the audit's `cluster` section (written only for more than one process).
  int processes = 1;
  std::string layout;  ///< e.g. "6 ranges of 1 file shared by 3 processes (...)"
};

/// Not an error: thrown by RunPlan on every process of a shared run but process 0, once process 0
/// no longer needs it. Process 0 holds the result and writes every output; a command that
/// catches this ends quietly with status 0.
class ShareServed : public std::exception {
 public:
  const char* what() const noexcept override { return "this process served its share of a shared run"; }
};

/// The names of a data set's files in reading order, for RowPlaceText (engine/data_set.h):
/// empty for a single file, whose rows are named by their line alone.
std::vector<std::string> SetFileNames(const RunResult& run);

/// Runs a plan on a data file or data set (the pipeline above). observer (optional) sees the
/// search's events as they happen. Throws InputError/PlanError for bad input.
RunResult RunPlan(const DataSet& data, const LoadedPlan& plan,
                  const RunOptions& options, SearchObserver* observer = nullptr);

/// The fingerprint of a file (engine/fingerprint.h) computed by reading it; throws InputError
/// naming the file when it cannot be read.
std::string FingerprintFile(const std::filesystem::path& path);

/// The fingerprints of a data set's files in reading order (DataSetFiles) and of the set, by
/// reading the bytes only (no parsing): for verify when a replay could not run.
struct DataSetFingerprints {
  std::vector<DataFileRecord> files;  ///< name, bytes and sha256 of each
  std::string sha256;                 ///< of the set (of the file, for one)
};
DataSetFingerprints FingerprintDataSet(const DataSet& data);

}  // namespace stepledger
