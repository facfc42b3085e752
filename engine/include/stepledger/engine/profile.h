#pragma once
// The parse-only first pass: each column's type, missing count, range and levels.
// Memory is O(columns x distinct levels), never O(rows).

#include <cstdint>
#include <filesystem>
#include <optional>
#include <string>
#include <vector>

#include "stepledger/engine/csv.h"

namespace stepledger {

enum class ColumnKind {
  kNumeric,      ///< every non-missing cell is a finite number (and there is at least one)
  kCategorical,  ///< some non-missing cell is not a number
  kEmpty,        ///< every cell is missing
};
const char* ToString(ColumnKind kind);

struct LevelCount {
  std::string level;
  std::uint64_t count = 0;
};

/// Where a cell is and what it says, for messages.
struct CellLocation {
  std::uint64_t line = 0;
  std::uint64_t column = 0;
  std::string text;
};

struct ColumnProfile {
  std::string name;
  std::size_t index = 0;  ///< 0-based position in the header
  ColumnKind kind = ColumnKind::kEmpty;
  std::uint64_t present = 0;  ///< non-missing cells
  std::uint64_t missing = 0;
  /// Numeric columns: over present cells (Welford, unweighted). NaN otherwise.
  double min = 0, max = 0, mean = 0, sd = 0;
  /// Categorical columns: distinct levels sorted byte-wise with counts (up to max_levels).
  std::vector<LevelCount> levels;
  /// True when the column had more distinct levels than ProfileOptions::max_levels;
  /// levels then holds only the first ones seen and the column cannot be a term.
  bool too_many_levels = false;
  /// Categorical columns: the first cell that is not a number.
  std::optional<CellLocation> first_text;
  /// Numeric cells count: how many present cells parsed as numbers (for a categorical column
  /// that is mostly numbers, this helps say "column 'price' has 2 text cells").
  std::uint64_t numeric_cells = 0;
};

struct ProfileOptions {
  /// Distinct levels kept per categorical column before it is marked too_many_levels.
  std::size_t max_levels = 10000;
};

struct DataProfile {
  std::filesystem::path path;
  std::vector<ColumnProfile> columns;  ///< header order
  std::uint64_t rows = 0;              ///< data records read
  /// The column of that name, or nullptr.
  const ColumnProfile* Find(std::string_view name) const;
};

/// Reads the whole file once. Throws InputError naming file:line:column for any cell that
/// parses as a non-finite number ("nan", "inf"), and for the reader's own errors.
DataProfile ProfileCsv(const std::filesystem::path& path, const CsvOptions& csv,
                       const ProfileOptions& options = {});

}  // namespace stepledger
