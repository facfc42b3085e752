#include "stepledger/engine/profile.h"

#include <algorithm>
#include <cmath>
#include <functional>
#include <limits>
#include <unordered_map>

#include "stepledger/engine/errors.h"
#include "stepledger/engine/number_format.h"
#include "stepledger/engine/table_scan.h"

namespace stepledger {

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
    return "more than " + FormatCount(static_cast<std::int64_t>(column.level_limit)) +
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

std::string LocationFile(const DataProfile& profile, const CellLocation& location) {
  return location.file.empty() ? profile.path.string() : location.file;
}

const ColumnProfile* DataProfile::Find(std::string_view name) const {
  for (const ColumnProfile& column : columns) {
    if (column.name == name) return &column;
  }
  return nullptr;
}

DataProfile ProfileCsv(const std::filesystem::path& path, const CsvOptions& csv,
                       const ProfileOptions& options) {
  ScanOptions scan;
  scan.csv = csv;
  scan.profile = options;
  scan.spill = false;
  return ScanData(path, scan).profile;
}

}  // namespace stepledger
