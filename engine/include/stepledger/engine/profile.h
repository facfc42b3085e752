#pragma once
// The parse-only first pass: each column's type, missing count, range and levels.
// Memory is O(columns x distinct levels), never O(rows).

#include <cstdint>
#include <filesystem>
#include <optional>
#include <string>
#include <vector>

#include "stepledger/engine/csv.h"
#include "stepledger/engine/limits.h"

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
  /// The file the cell is in, as messages name it (a data set has several; line and column are
  /// that file's own). Set by the scan; empty in locations made elsewhere: then the profile's
  /// path (LocationFile).
  std::string file;
};

struct DataProfile;
/// The file a location lies in: location.file, or the profile's path when that is empty.
std::string LocationFile(const DataProfile& profile, const CellLocation& location);

struct ColumnProfile {
  std::string name;
  std::size_t index = 0;  ///< 0-based position in the header
  ColumnKind kind = ColumnKind::kEmpty;
  std::uint64_t present = 0;  ///< non-missing cells
  std::uint64_t missing = 0;
  /// Numeric columns: over present cells (Welford, unweighted; sd is the sample standard
  /// deviation with n-1, NaN when only one cell is present). NaN for other kinds.
  double min = 0, max = 0, mean = 0, sd = 0;
  /// Numeric columns: the first cell (in file order) holding min and max, with the value's
  /// shortest round-trip text; for saying where a value out of the range stepledger can fit is
  /// (design.h, kLargestMagnitude). Unset for other kinds and in profiles rebuilt from an audit.
  std::optional<CellLocation> min_at, max_at;
  /// Categorical columns: distinct texts of the present cells, sorted byte-wise, with counts
  /// (up to max_levels). Numeric columns keep them too when they have at most max_levels
  /// distinct texts (so that a numeric code can be a categorical term); a numeric column with
  /// more has empty levels and too_many_levels false. Empty columns: no levels.
  std::vector<LevelCount> levels;
  /// Categorical columns: true when the column had more distinct levels than
  /// ProfileOptions::max_levels (level_limit); levels is then empty (which levels a partial list
  /// would hold would depend on how the file was cut for parallel reading) and the column cannot
  /// be a term. Always false for other kinds.
  bool too_many_levels = false;
  /// ProfileOptions::max_levels of the pass (what too_many_levels counts against).
  std::size_t level_limit = 0;
  /// Categorical columns: the first cell that is not a number (line, column as in csv.h and
  /// the cell's text). Unset for other kinds.
  std::optional<CellLocation> first_text;
  /// Numeric cells count: how many present cells parsed as numbers (for a categorical column
  /// that is mostly numbers, this helps say "column 'price' has 2 text cells").
  std::uint64_t numeric_cells = 0;
};

struct ProfileOptions {
  /// Distinct levels kept per column before a categorical column is marked too_many_levels: the
  /// levels limit (InputLimits::levels, engine/limits.h). A column that passes it stops keeping
  /// levels and frees those it kept, so memory is O(columns x max_levels) at most and falls back
  /// as numeric columns of many distinct values overflow. Default 1,000; 0 keeps none (every
  /// non-empty categorical column is then too_many_levels).
  std::size_t max_levels = InputLimits{}.levels;
};

struct DataProfile {
  /// The data as people see it: the file, or the data set (DescribeDataSet, engine/data_set.h).
  std::filesystem::path path;
  std::vector<ColumnProfile> columns;  ///< header order
  std::uint64_t rows = 0;              ///< data records read
  /// The column of that name, or nullptr.
  const ColumnProfile* Find(std::string_view name) const;
};

/// Distinct levels a categorical term may have unless the plan raises its `max_levels`
/// (common practice: beyond about a hundred levels a column is an identifier or needs
/// grouping before it can be a term; each level costs a design column).
inline constexpr std::size_t kDefaultMaxLevels = 100;

/// The rule that keeps a column out of the candidate terms when a plan says "terms": "all"
/// (and out of `profile`'s starter plan): why the column cannot be a term, or nullopt when it
/// can. In order: every cell missing; a categorical column with a single level; one that looks
/// like an identifier (three or more present cells and every one distinct, e.g. a listing
/// number in text form); one with more than max_levels levels (or more than the profile
/// kept, too_many_levels). Numeric columns are always usable. The reason is plain words for a
/// note ("every value distinct (1,999 values): looks like an identifier").
std::optional<std::string> ReasonNotACandidateTerm(const ColumnProfile& column, std::size_t max_levels);

/// Reads the whole file once (one CsvReader pass; memory O(columns x max_levels)). Throws
/// InputError naming file:line:column for any cell that parses as a non-finite number ("nan",
/// "inf", or a number too large for a double), and for the reader's own errors.
DataProfile ProfileCsv(const std::filesystem::path& path, const CsvOptions& csv,
                       const ProfileOptions& options = {});

}  // namespace stepledger
