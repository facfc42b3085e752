// The design applied to rows: the cells a row is read from, the row expanded into design
// values, and the design's small queries. Kept apart from design.cpp, which builds the design
// from a plan and a profile once; this code runs on every row.
#include "stepledger/engine/design.h"

#include <algorithm>
#include <cmath>
#include <span>
#include <string>
#include <vector>

#include "design_quote.h"
#include "stepledger/engine/errors.h"

namespace stepledger {
namespace {

using design_detail::Quote;
using design_detail::QuotePath;

}  // namespace

std::size_t Design::FindTerm(std::string_view name) const {
  for (std::size_t i = 0; i < terms.size(); ++i) {
    if (terms[i].name == name) return i;
  }
  return kNoTerm;
}

std::vector<std::size_t> Design::TermColumns(std::size_t term) const {
  std::vector<std::size_t> indices;
  if (term >= terms.size()) return indices;
  for (std::size_t c = 0; c < terms[term].column_count; ++c) {
    indices.push_back(terms[term].first_column + c);
  }
  return indices;
}

std::vector<double> Design::scales() const {
  std::vector<double> result;
  result.reserve(columns.size() + 1);
  for (const auto& column : columns) result.push_back(column.scale);
  result.push_back(response_scale);
  return result;
}

void Design::CheckHeader(const CsvReader& reader) const {
  for (const auto& cell : source.cells) {
    const std::ptrdiff_t found = reader.ColumnIndex(cell.column_name);
    if (found != cell.header_index) {
      const std::string now = found < 0 ? std::string("is missing from the header")
                                        : "is now column " + std::to_string(found + 1);
      throw InputError(reader.path().string() + ": column " + Quote(cell.column_name) + " " + now +
                       ", but it was column " + std::to_string(cell.header_index + 1) +
                       " when the design was built from " + QuotePath(source.file_name) +
                       "; the data changed since they were profiled");
    }
  }
}

bool Design::HasLowOrderParts() const {
  return std::any_of(terms.begin(), terms.end(),
                     [](const DesignTerm& term) { return term.kind == TermKind::kPower; });
}

RowOutcome Design::Expand(const CsvReader& reader, const CsvRecord& record, std::span<double> x,
                          double& y, double& w, std::span<double> x_low) const {
  // Per-thread scratch: grows once, so a row costs no heap allocation.
  thread_local std::vector<double> cell_values;
  thread_local std::vector<std::size_t> cell_levels;
  const std::size_t cell_count = source.cells.size();
  if (cell_values.size() < cell_count) {
    cell_values.resize(cell_count);
    cell_levels.resize(cell_count);
  }
  const std::vector<std::string>& missing_tokens = reader.options().missing_tokens;
  // The first cell that drops the row, and why.
  const Source::Cell* dropping_cell = nullptr;
  DropReason reason = DropReason::kMissing;

  for (std::size_t c = 0; c < cell_count; ++c) {
    const Source::Cell& cell = source.cells[c];
    const CsvField& field = record.fields[static_cast<std::size_t>(cell.header_index)];
    double value = 0;
    const CellKind kind = ClassifyCell(field.text, missing_tokens, value);
    if (kind == CellKind::kMissing) {
      if (dropping_cell == nullptr) dropping_cell = &cell;
      continue;
    }
    if (cell.categorical) {
      const auto& levels = source.level_index[cell.term];
      const auto level = levels.find(field.text);
      if (level == levels.end()) {
        throw InputError(reader.Where(field) + ": level " + Quote(field.text) + " of column " +
                         Quote(cell.column_name) +
                         " was not in the data when the design was built");
      }
      cell_levels[c] = level->second;
      continue;
    }
    if (kind == CellKind::kNonFinite) {
      throw InputError(reader.Where(field) + ": column " + Quote(cell.column_name) +
                       " holds the non-finite number " + Quote(field.text) +
                       "; values must be finite");
    }
    if (kind != CellKind::kNumber) {
      throw InputError(reader.Where(field) + ": column " + Quote(cell.column_name) +
                       " is numeric, but this cell holds " + Quote(field.text));
    }
    if (static_cast<std::ptrdiff_t>(c) == source.weights_cell) {
      if (value < 0) {
        throw InputError(reader.Where(field) + ": weight " + Quote(field.text) + " in column " +
                         Quote(cell.column_name) + " is negative; precision weights must be >= 0");
      }
      if (value == 0 && dropping_cell == nullptr) {
        dropping_cell = &cell;
        reason = DropReason::kZeroWeight;
      }
    }
    cell_values[c] = value;
  }
  if (dropping_cell != nullptr) return RowOutcome{false, reason, dropping_cell->column_name};

  double response_value = cell_values[static_cast<std::size_t>(source.response_cell)];
  if (response_transform == ResponseTransform::kLog) {
    if (!(response_value > 0)) {
      const CsvField& field = record.fields[static_cast<std::size_t>(source.response)];
      throw InputError(reader.Where(field) + ": response " + Quote(response) + " is " +
                       Quote(field.text) + " in data row " + std::to_string(record.row_index + 1) +
                       ", but response_transform \"log\" needs positive values");
    }
    response_value = std::log(response_value);
  }
  y = response_value;
  w = source.weights_cell >= 0 ? cell_values[static_cast<std::size_t>(source.weights_cell)] : 1.0;

  const std::size_t bad_log_term = EvaluateTerms(std::span<const double>(cell_values.data(), cell_count),
                                                 std::span<const std::size_t>(cell_levels.data(), cell_count),
                                                 x, x_low);
  if (bad_log_term != kNoTerm) {
    const DesignTerm& term = terms[bad_log_term];
    const auto cell = static_cast<std::size_t>(source.term_cell[bad_log_term]);
    const CsvField& field = record.fields[static_cast<std::size_t>(source.cells[cell].header_index)];
    throw InputError(reader.Where(field) + ": log term " + Quote(term.name) + " of column " +
                     Quote(term.source_column) + " needs a positive value, found " +
                     Quote(field.text));
  }
  RowOutcome outcome;
  outcome.used = true;
  return outcome;
}

std::size_t Design::EvaluateTerms(std::span<const double> cell_values,
                                  std::span<const std::size_t> cell_levels, std::span<double> x,
                                  std::span<double> x_low) const {
  if (!x_low.empty()) std::fill(x_low.begin(), x_low.end(), 0.0);
  if (intercept) x[0] = 1.0;
  for (const std::size_t t : source.evaluation_order) {
    const DesignTerm& term = terms[t];
    double* out = x.data() + term.first_column;
    const std::ptrdiff_t cell = source.term_cell[t];
    switch (term.kind) {
      case TermKind::kNumeric:
        out[0] = cell_values[static_cast<std::size_t>(cell)];
        break;
      case TermKind::kPower: {
        // Repeated products in long double, rounded once to double.
        const long double base = cell_values[static_cast<std::size_t>(cell)];
        long double power = base;
        for (int d = 1; d < term.degree; ++d) power *= base;
        out[0] = static_cast<double>(power);
        if (!x_low.empty()) {
          x_low[term.first_column] = static_cast<double>(power - static_cast<long double>(out[0]));
        }
        break;
      }
      case TermKind::kLog: {
        const double value = cell_values[static_cast<std::size_t>(cell)];
        if (!(value > 0)) return t;
        out[0] = std::log(value);
        break;
      }
      case TermKind::kCategorical: {
        std::fill(out, out + term.column_count, 0.0);
        const std::size_t offset = cell_levels[static_cast<std::size_t>(cell)];
        if (offset != kNoTerm) out[offset] = 1.0;
        break;
      }
      case TermKind::kProduct: {
        const DesignTerm& first = terms[term.parts[0]];
        const DesignTerm& second = terms[term.parts[1]];
        const double* a = x.data() + first.first_column;
        const double* b = x.data() + second.first_column;
        for (std::size_t i = 0; i < first.column_count; ++i) {
          for (std::size_t j = 0; j < second.column_count; ++j) {
            out[i * second.column_count + j] = a[i] * b[j];
          }
        }
        break;
      }
    }
  }
  return kNoTerm;
}

}  // namespace stepledger
