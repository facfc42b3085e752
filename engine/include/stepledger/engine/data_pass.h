#pragma once
// Passes over the data file: the factor pass (streaming, optionally multi-threaded) and the
// row replay used for refinement and per-row diagnostics of a final model.

#include <cstdint>
#include <filesystem>
#include <functional>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "stepledger/engine/csv.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/factor.h"

namespace stepledger {

struct PassOptions {
  CsvOptions csv;
  /// Threads folding factors (>= 1). The reader parses on the calling thread; blocks of rows
  /// go to worker b % threads and the workers' factors merge in worker order, so a given
  /// thread count always gives the same bits.
  int threads = 1;
  /// Rows per fold block.
  std::size_t block_rows = 256;
};

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
  /// One entry per (reason, column) that dropped a row, ordered by reason (DropReason order),
  /// then column (byte-wise), so that any pass over the same rows gives the same list.
  std::vector<RowDrop> rows_dropped;

  /// Counts one dropped row (O(entries); there are few: one per reason and column).
  void CountDropped(DropReason reason, std::string_view column);
  /// The sum of rows_dropped[i].rows.
  std::uint64_t RowsDroppedTotal() const;
};

struct PassResult {
  Factor factor;
  RowAccounting accounting;
};

/// One pass over the file: expands every row and folds the used ones into the factor.
/// byte_observer (optional) sees every byte read, in order (for the data fingerprint).
PassResult RunFactorPass(const std::filesystem::path& path, const Design& design,
                         const PassOptions& options,
                         std::function<void(std::string_view)> byte_observer = {});

/// A used row seen again: x unscaled (design.column_count() values).
struct UsedRow {
  std::uint64_t row_index = 0;  ///< 0-based data record index in the file
  std::uint64_t line = 0;       ///< 1-based line where the record starts
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

/// Reads the file again and calls visit for every used row, in file order.
void ForEachUsedRow(const std::filesystem::path& path, const Design& design,
                    const CsvOptions& csv, const std::function<void(const UsedRow&)>& visit);

/// Something that can replay the used rows of the data a factor was built from.
/// (A file through ForEachUsedRow, or rows kept in memory by tests.)
using RowReplay = std::function<void(const std::function<void(const UsedRow&)>&)>;

/// A RowReplay over a file.
RowReplay FileRowReplay(std::filesystem::path path, const Design& design, CsvOptions csv);

}  // namespace stepledger
