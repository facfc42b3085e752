#pragma once
// Passes over the rows of a data file, read back from its typed spill (engine/spill.h; the text
// itself is parsed once, by engine/table_scan.h): the factor pass (optionally multi-threaded)
// and the row replay used for refinement and the diagnostics of a final model.

#include <cstdint>
#include <filesystem>
#include <functional>
#include <memory>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "stepledger/engine/csv.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/factor.h"
#include "stepledger/engine/resampling.h"
#include "stepledger/engine/spill.h"

namespace stepledger {

/// Where a pass over the spill is: the calling thread's share of it in spill chunks (up to
/// kSpillChunkRows rows each), done of total; pass is "factor pass" or "replay".
struct PassProgress {
  const char* pass = "";
  std::uint64_t done = 0;
  std::uint64_t total = 0;
};

/// A check a pass over the spill calls before each chunk it reads (every few thousand rows: a few
/// milliseconds of work), so that its caller can report progress or stop it: the check stops the
/// pass by throwing (anything, a non-std::exception included), and the pass unwinds as from any
/// other error (the spill is removed by its owner). Cost when none is set: one thread-local read
/// per chunk.
using PassCheck = std::function<void(const PassProgress&)>;

/// Sets the check for the passes that the constructing thread runs (the factor pass, its
/// share of a multi-threaded factor pass, every replay: ForEachUsedRow, BuildFoldFactors,
/// SpillRowReplay) while the scope lives; restores the previous check on destruction. Thread
/// local: threads a pass starts do not call it, but in a multi-threaded factor pass the calling
/// thread folds a share of its own (detail::RunTasks runs one task on the calling thread), so
/// the check is called throughout the pass, and when it throws the other shares stop at their
/// next chunk. Used by the Python module for Ctrl-C (python/src/module.cpp).
class PassCheckScope {
 public:
  explicit PassCheckScope(PassCheck check);
  ~PassCheckScope();
  PassCheckScope(const PassCheckScope&) = delete;
  PassCheckScope& operator=(const PassCheckScope&) = delete;

 private:
  PassCheck check_;
  const PassCheck* previous_;
};

struct PassOptions {
  /// Reading options for the conveniences that start from a file (the spill carries its own).
  CsvOptions csv;
  /// Threads folding factors (>= 1). Worker t folds the t-th contiguous share of the spill's
  /// chunks and the workers' factors merge in worker order, so a given thread count on a given
  /// spill always gives the same bits.
  int threads = 1;
  /// Rows per fold block.
  std::size_t block_rows = 256;
  /// Cross-validation folds (engine/resampling.h): when set, every used row is folded into the
  /// factor of its fold, and the pass's factor is the merge of the fold factors in fold order
  /// (one fold of each row: the folds cost no more rows than the plain factor). Unset: one factor.
  std::optional<FoldSettings> folds;
  /// Rows held out (engine/resampling.h): a usable row drawn into the holdout enters no factor
  /// and is counted in RowAccounting::rows_held_out.
  std::optional<HoldoutSettings> holdout;
};

/// The memory the fold factors of a pass would take (bytes): the fold triangles and blocks of
/// every thread, and the training triangles of the cross-validation. RunPlan compares it with
/// kFoldFactorBudget.
std::uint64_t FoldFactorBytes(std::size_t design_columns, std::size_t folds, int threads, std::size_t block_rows);
/// Above this, the fold factors of every design column are not built in the factor pass.
inline constexpr std::uint64_t kFoldFactorBudget = std::uint64_t{1} << 30;

/// Rows dropped for one reason in one column (the audit's `data.rows_dropped` entries).
struct RowDrop {
  DropReason reason = DropReason::kMissing;
  std::string column;      ///< the column whose cell dropped the rows (the weights for kZeroWeight)
  std::uint64_t rows = 0;  ///< >= 1
  bool operator==(const RowDrop&) const = default;
};

/// Which rows were read, used and dropped (by reason and column).
struct RowAccounting {
  std::uint64_t rows_read = 0;
  std::uint64_t rows_used = 0;
  /// Rows the plan's holdout set aside (engine/resampling.h): usable rows that enter no selection
  /// statistic. rows_read = rows_used + rows_held_out + dropped.
  std::uint64_t rows_held_out = 0;
  /// One entry per (reason, column) that dropped a row, ordered by reason (DropReason order),
  /// then column (byte-wise), so that any pass over the same rows gives the same list.
  std::vector<RowDrop> rows_dropped;

  /// Counts dropped rows (O(entries); there are few: one per reason and column).
  void CountDropped(DropReason reason, std::string_view column, std::uint64_t rows = 1);
  /// Adds another pass's counts (of other rows).
  void Add(const RowAccounting& other);
  /// The sum of rows_dropped[i].rows.
  std::uint64_t RowsDroppedTotal() const;
};

struct PassResult {
  Factor factor;
  /// One factor per fold (fold order) when PassOptions::folds is set; empty otherwise.
  std::vector<Factor> fold_factors;
  RowAccounting accounting;
};

/// One pass over the spill: expands every row and folds the used ones into the factor.
/// Sets BLAS to one thread (engine/lapack.h): the pass's own threads are the parallelism.
PassResult RunFactorPass(const Spill& spill, const Design& design, const PassOptions& options);

/// The same from a file: one ScanData (engine/table_scan.h) into a spill removed afterwards.
/// For tests and small tools; a run scans once and passes the spill to every pass.
PassResult RunFactorPass(const std::filesystem::path& path, const Design& design, const PassOptions& options);

/// The response counts as constant when its values over the rows used differ by at most this
/// share of their magnitude (they agree in all but the last dozen of their 53 bits): the factor
/// then resolves the sums of squares about the mean to a few digits at best, so that with an
/// intercept every RSS, and any route, follows rounding errors.
inline constexpr double kConstantResponseSpread = 0x1p-40;

/// Refuses a pass that leaves nothing to fit, with an InputError naming data_name:
///  - no row used: none read (a header alone), or every row dropped; the message counts the
///    rows dropped for each reason and column (the plan's weights column, missing cells);
///  - a response that is 0 in every row used;
///  - with an intercept, a response constant over the rows used (kConstantResponseSpread).
/// A constant response without an intercept is a model like any other. RunPlan calls it after
/// the factor pass, before any search.
void RequireSomethingToFit(const PassResult& pass, const Design& design, const std::string& data_name);

/// A used row seen again: x unscaled (design.column_count() values).
struct UsedRow {
  std::uint64_t row_index = 0;  ///< 0-based data record index in the file
  std::uint64_t line = 0;       ///< 1-based line where the record starts, in its own file
  /// The file of a data set the record is in: an index into Spill::sources() (0 for one file).
  std::size_t file = 0;
  std::span<const double> x;
  /// Optional low-order parts of x (empty, or design.column_count() values): the exact value of
  /// column j is x[j] + x_low[j]. A power computed in long double can pass its rounding error
  /// here (x_low = (double)(p - (long double)x)); refinement then fits the long double design,
  /// which an ill-conditioned polynomial needs (NIST StRD Filip: 7.6 digits with x^k rounded to
  /// double, whatever the solver; 11 digits with the low parts). Empty means all zero.
  std::span<const double> x_low;
  double y = 0;
  double weight = 1;
};

/// Which used rows a replay visits.
enum class RowSet {
  kModelRows,    ///< the rows the factor holds (used and not held out)
  kHeldOutRows,  ///< the rows the holdout set aside (usable, held out)
};

/// Calls visit for every used row of the spill, in file order: the model's rows, or the held-out
/// ones (none without a holdout).
void ForEachUsedRow(const Spill& spill, const Design& design, const std::function<void(const UsedRow&)>& visit,
                    const std::optional<HoldoutSettings>& holdout = std::nullopt, RowSet set = RowSet::kModelRows);

/// The same for the rows of the spill's ranges [first_range, last_range) only: a process of a
/// cluster run (engine/share_exchange.h) replays its ranges one at a time, so that the driving
/// process sees every process's rows in record order.
void ForEachUsedRowInRanges(const Spill& spill, const Design& design, const std::function<void(const UsedRow&)>& visit,
                            const std::optional<HoldoutSettings>& holdout, RowSet set, std::size_t first_range,
                            std::size_t last_range);

/// Something that can replay the used rows of the data a factor was built from.
/// (A spill, or rows kept in memory by tests.)
using RowReplay = std::function<void(const std::function<void(const UsedRow&)>&)>;

/// A RowReplay over a spill (kept alive by the replay): the rows of ForEachUsedRow.
RowReplay SpillRowReplay(std::shared_ptr<const Spill> spill, const Design& design,
                         std::optional<HoldoutSettings> holdout = std::nullopt, RowSet set = RowSet::kModelRows);

/// The fold factors of a subset of the design's columns, built by replaying the model's rows
/// (for a final model whose design is too wide for fold factors of every column in the factor
/// pass, kFoldFactorBudget). Factor columns: `columns` in the given order, then the response.
std::vector<Factor> BuildFoldFactors(const Spill& spill, const Design& design, std::span<const std::size_t> columns,
                                     const FoldSettings& folds, const std::optional<HoldoutSettings>& holdout,
                                     std::size_t block_rows = 256);

/// The same from a file (one scan into a spill removed afterwards; for tests and small tools).
void ForEachUsedRow(const std::filesystem::path& path, const Design& design, const CsvOptions& csv,
                    const std::function<void(const UsedRow&)>& visit);

/// A RowReplay over a file: scans it once into a spill that the replay keeps (for tests and
/// small tools; a run replays the spill of its own scan).
RowReplay FileRowReplay(const std::filesystem::path& path, const Design& design, const CsvOptions& csv);

}  // namespace stepledger
