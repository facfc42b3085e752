#include "stepledger/engine/profile.h"

#include <algorithm>
#include <cmath>
#include <functional>
#include <limits>
#include <unordered_map>

#include "stepledger/engine/errors.h"
#include "stepledger/engine/number_format.h"

namespace stepledger {
namespace {

constexpr double kUndefined = std::numeric_limits<double>::quiet_NaN();

// Hashes std::string and std::string_view alike, so that counting a cell needs no allocation
// unless its text is a new level.
struct TextHash {
  using is_transparent = void;
  std::size_t operator()(std::string_view text) const noexcept {
    return std::hash<std::string_view>{}(text);
  }
};

// State of one column during the pass.
struct ColumnTally {
  std::uint64_t present = 0;
  std::uint64_t missing = 0;
  std::uint64_t numeric_cells = 0;
  // Welford's running mean and sum of squared deviations (Welford 1962, Technometrics 4(3)).
  double mean = 0;
  double squared_deviations = 0;
  double min = std::numeric_limits<double>::infinity();
  double max = -std::numeric_limits<double>::infinity();
  bool levels_overflowed = false;
  std::unordered_map<std::string, std::uint64_t, TextHash, std::equal_to<>> level_counts;
  std::optional<CellLocation> first_text;
};

}  // namespace

const char* ToString(ColumnKind kind) {
  switch (kind) {
    case ColumnKind::kNumeric: return "numeric";
    case ColumnKind::kCategorical: return "categorical";
    case ColumnKind::kEmpty: return "empty";
  }
  return "unknown";
}

std::optional<std::string> ReasonNotACandidateTerm(const ColumnProfile& column, std::size_t max_levels) {
  if (column.kind == ColumnKind::kEmpty) return std::string("every cell is missing");
  if (column.kind != ColumnKind::kCategorical) return std::nullopt;
  const std::size_t levels = column.levels.size();
  if (column.too_many_levels) {
    return "more than " + FormatCount(static_cast<std::int64_t>(levels)) +
           " distinct levels: looks like an identifier or free text";
  }
  if (levels < 2) return std::string("a single level carries no information");
  if (column.present >= 3 && levels == column.present) {
    return "every value distinct (" + FormatCount(static_cast<std::int64_t>(levels)) +
           " values): looks like an identifier";
  }
  if (levels > max_levels) {
    return FormatCount(static_cast<std::int64_t>(levels)) + " levels, more than max_levels (" +
           FormatCount(static_cast<std::int64_t>(max_levels)) +
           "); to use it, list it as a categorical term in a plan and raise \"max_levels\"";
  }
  return std::nullopt;
}

const ColumnProfile* DataProfile::Find(std::string_view name) const {
  for (const ColumnProfile& column : columns) {
    if (column.name == name) return &column;
  }
  return nullptr;
}

DataProfile ProfileCsv(const std::filesystem::path& path, const CsvOptions& csv,
                       const ProfileOptions& options) {
  CsvReader reader(path, csv);
  const std::vector<std::string>& header = reader.header();
  std::vector<ColumnTally> tallies(header.size());
  DataProfile profile;
  profile.path = path;

  CsvRecord record;
  while (reader.Next(record)) {
    ++profile.rows;
    for (std::size_t index = 0; index < tallies.size(); ++index) {
      const CsvField& field = record.fields[index];
      ColumnTally& tally = tallies[index];
      double value = 0;
      switch (ClassifyCell(field.text, csv.missing_tokens, value)) {
        case CellKind::kMissing:
          ++tally.missing;
          continue;
        case CellKind::kNonFinite:
          throw InputError(reader.Where(field) + ": column '" + QuoteForMessage(header[index]) + "' holds '" +
                           QuoteForMessage(field.text) + "', which is not a finite number");
        case CellKind::kNumber: {
          ++tally.numeric_cells;
          const double delta = value - tally.mean;
          tally.mean += delta / static_cast<double>(tally.numeric_cells);
          tally.squared_deviations += delta * (value - tally.mean);
          tally.min = std::min(tally.min, value);
          tally.max = std::max(tally.max, value);
          break;
        }
        case CellKind::kText:
          if (!tally.first_text) {
            tally.first_text = CellLocation{field.line, field.column, std::string(field.text)};
          }
          break;
      }
      ++tally.present;
      if (tally.levels_overflowed) continue;
      const auto found = tally.level_counts.find(field.text);
      if (found != tally.level_counts.end()) {
        ++found->second;
      } else if (tally.level_counts.size() < options.max_levels) {
        tally.level_counts.emplace(std::string(field.text), 1);
      } else {
        // Once past the limit the column cannot be a categorical term; stop paying for it.
        tally.levels_overflowed = true;
      }
    }
  }

  profile.columns.reserve(header.size());
  for (std::size_t index = 0; index < header.size(); ++index) {
    ColumnTally& tally = tallies[index];
    ColumnProfile& column = profile.columns.emplace_back();
    column.name = header[index];
    column.index = index;
    column.present = tally.present;
    column.missing = tally.missing;
    column.numeric_cells = tally.numeric_cells;
    if (tally.first_text) {
      column.kind = ColumnKind::kCategorical;
    } else if (tally.numeric_cells > 0) {
      column.kind = ColumnKind::kNumeric;
    } else {
      column.kind = ColumnKind::kEmpty;
    }

    if (column.kind == ColumnKind::kNumeric) {
      // Degenerate case: one present cell has no sample standard deviation (n-1 = 0).
      const double n = static_cast<double>(tally.numeric_cells);
      column.min = tally.min;
      column.max = tally.max;
      column.mean = tally.mean;
      column.sd = tally.numeric_cells > 1 ? std::sqrt(tally.squared_deviations / (n - 1)) : kUndefined;
    } else {
      column.min = column.max = column.mean = column.sd = kUndefined;
    }

    const bool keep_levels = column.kind == ColumnKind::kCategorical ||
                             (column.kind == ColumnKind::kNumeric && !tally.levels_overflowed);
    if (keep_levels) {
      column.levels.reserve(tally.level_counts.size());
      for (auto& [level, count] : tally.level_counts) {
        column.levels.push_back(LevelCount{level, count});
      }
      // std::string compares with char_traits<char>, i.e. memcmp: byte-wise, unsigned.
      std::sort(column.levels.begin(), column.levels.end(),
                [](const LevelCount& a, const LevelCount& b) { return a.level < b.level; });
    }
    column.too_many_levels = column.kind == ColumnKind::kCategorical && tally.levels_overflowed;
    column.first_text = std::move(tally.first_text);
  }
  return profile;
}

}  // namespace stepledger
