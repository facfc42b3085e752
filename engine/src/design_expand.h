// The one body of Design::Expand, over any source of cells: the text of a CSV record
// (design_rows.cpp) or a row of the typed spill (spill_rows.cpp). Both give the same rows, the
// same drop reasons and the same messages; only where a cell's text and place come from differs.
//
// A CellSource provides:
//   CellKind Classify(std::size_t cell, double& value)   as ClassifyCell on the cell's text
//   bool Level(std::size_t cell, std::size_t& offset)    the level's offset among the term's
//                                                         columns (kNoTerm: the baseline); false
//                                                         when the level was not in the profile
//   [[noreturn]] void Fail(std::size_t cell, Detail detail)  throws an InputError at the cell,
//                                                         detail(text) saying what is wrong
//   std::uint64_t RowIndex()                              0-based data record index
#pragma once

#include <cmath>
#include <span>
#include <string>
#include <vector>

#include "design_quote.h"
#include "stepledger/engine/csv.h"
#include "stepledger/engine/design.h"

namespace stepledger::design_detail {

template <typename CellSource>
RowOutcome ExpandRow(const Design& design, CellSource& row, std::span<double> x, double& y, double& w,
                     std::span<double> x_low) {
  const Design::Source& source = design.source;
  // Per-thread scratch: grows once, so a row costs no heap allocation.
  thread_local std::vector<double> cell_values;
  thread_local std::vector<std::size_t> cell_levels;
  const std::size_t cell_count = source.cells.size();
  if (cell_values.size() < cell_count) {
    cell_values.resize(cell_count);
    cell_levels.resize(cell_count);
  }
  // The first cell that drops the row, and why.
  const Design::Source::Cell* dropping_cell = nullptr;
  DropReason reason = DropReason::kMissing;

  for (std::size_t c = 0; c < cell_count; ++c) {
    const Design::Source::Cell& cell = source.cells[c];
    double value = 0;
    const CellKind kind = row.Classify(c, value);
    if (kind == CellKind::kMissing) {
      if (dropping_cell == nullptr) dropping_cell = &cell;
      continue;
    }
    if (cell.categorical) {
      if (!row.Level(c, cell_levels[c])) {
        row.Fail(c, [&](std::string_view text) {
          return "level " + Quote(text) + " of column " + Quote(cell.column_name) +
                 " was not in the data when the design was built";
        });
      }
      continue;
    }
    if (kind == CellKind::kNonFinite) {
      row.Fail(c, [&](std::string_view text) {
        return "column " + Quote(cell.column_name) + " holds the non-finite number " + Quote(text) +
               "; values must be finite";
      });
    }
    if (kind != CellKind::kNumber) {
      row.Fail(c, [&](std::string_view text) {
        return "column " + Quote(cell.column_name) + " is numeric, but this cell holds " + Quote(text);
      });
    }
    if (static_cast<std::ptrdiff_t>(c) == source.weights_cell) {
      if (value < 0) {
        row.Fail(c, [&](std::string_view text) {
          return "weight " + Quote(text) + " in column " + Quote(cell.column_name) +
                 " is negative; precision weights must be >= 0";
        });
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
  if (design.response_transform == ResponseTransform::kLog) {
    if (!(response_value > 0)) {
      row.Fail(static_cast<std::size_t>(source.response_cell), [&](std::string_view text) {
        return "response " + Quote(design.response) + " is " + Quote(text) + " in data row " +
               std::to_string(row.RowIndex() + 1) + ", but response_transform \"log\" needs positive values";
      });
    }
    response_value = std::log(response_value);
  }
  y = response_value;
  w = source.weights_cell >= 0 ? cell_values[static_cast<std::size_t>(source.weights_cell)] : 1.0;

  const std::size_t bad_log_term =
      design.EvaluateTerms(std::span<const double>(cell_values.data(), cell_count),
                           std::span<const std::size_t>(cell_levels.data(), cell_count), x, x_low);
  if (bad_log_term != kNoTerm) {
    const DesignTerm& term = design.terms[bad_log_term];
    row.Fail(static_cast<std::size_t>(source.term_cell[bad_log_term]), [&](std::string_view text) {
      return "log term " + Quote(term.name) + " of column " + Quote(term.source_column) +
             " needs a positive value, found " + Quote(text);
    });
  }
  RowOutcome outcome;
  outcome.used = true;
  return outcome;
}

}  // namespace stepledger::design_detail
