#include "design_magnitude.h"

#include <cmath>
#include <cstdio>
#include <optional>
#include <string>

#include "design_quote.h"
#include "stepledger/engine/errors.h"

namespace stepledger::design_detail {
namespace {

// A computed magnitude for a message: four significant digits, in long double so that a power
// beyond the doubles' range still prints as a number.
std::string Magnitude(long double value) {
  char text[48];
  std::snprintf(text, sizeof text, "%.4Lg", value);
  return text;
}

// "1e+165": the power of ten to divide by (too large) or multiply by (too small) so that the
// largest magnitude lands between 1 and 10.
std::string PowerOfTen(long double magnitude) {
  const long exponent = std::lround(std::floor(std::log10(magnitude)));
  const long shown = exponent < 0 ? -exponent : exponent;
  return "1e+" + std::to_string(shown);
}

bool Outside(double bound) {
  return bound != 0 && !(bound >= kSmallestMagnitude && bound <= kLargestMagnitude);
}

// What is wrong with a largest magnitude and what to do about it, after the subject.
std::string Remedy(long double bound, const std::string& what_to_rescale) {
  const bool large = !(bound < kSmallestMagnitude);
  return std::string(large ? "beyond" : "below") +
         " the magnitudes stepledger fits (a column's largest value must lie between 1e-60 and "
         "1e+60 in magnitude, so that sums of squares and variances stay well inside the range of "
         "double-precision numbers); rescale " + what_to_rescale + ", e.g. " +
         (large ? "divide it by " : "multiply it by ") + PowerOfTen(bound) + " (a change of units)";
}

// The cell of a numeric column's largest magnitude, if the profile knows it.
const CellLocation* LargestCell(const ColumnProfile& column) {
  const bool max_is_larger = std::fabs(column.max) >= std::fabs(column.min);
  const std::optional<CellLocation>& cell = max_is_larger ? column.max_at : column.min_at;
  return cell ? &*cell : nullptr;
}

double LargestValue(const ColumnProfile& column) {
  return std::fabs(column.max) >= std::fabs(column.min) ? column.max : column.min;
}

// Throws at the cell of the column's largest magnitude: "F:L:C: <detail>" (or "F: <detail>").
[[noreturn]] void FailAtLargest(const DataProfile& profile, const ColumnProfile& column,
                                const std::string& detail) {
  if (const CellLocation* cell = LargestCell(column)) {
    throw LocatedInputError(LocationFile(profile, *cell), cell->line, cell->column, detail);
  }
  throw InputError(profile.path.string() + ": " + detail);
}

std::string ValueText(const ColumnProfile& column) {
  if (const CellLocation* cell = LargestCell(column)) return cell->text;
  return Magnitude(LargestValue(column));
}

std::string Where(const DataProfile& profile, const ColumnProfile& column) {
  if (const CellLocation* cell = LargestCell(column)) {
    return FormatLocation(LocationFile(profile, *cell), cell->line, cell->column);
  }
  return profile.path.string();
}

void CheckColumn(const DataProfile& profile, const std::string& name, const std::string& role) {
  const ColumnProfile* column = profile.Find(name);
  if (column == nullptr || column->kind != ColumnKind::kNumeric) return;
  const double bound = std::max(std::fabs(column->min), std::fabs(column->max));
  if (!Outside(bound)) return;
  FailAtLargest(profile, *column,
                role + " " + Quote(column->name) + " holds " + ValueText(*column) +
                    (bound < kSmallestMagnitude ? ", its largest value in magnitude," : "") + " " +
                    Remedy(bound, "the column"));
}

void CheckTerm(const Design& design, const DataProfile& profile, std::size_t index) {
  const DesignTerm& term = design.terms[index];
  double bound = 0;
  for (std::size_t c = term.first_column; c < term.first_column + term.column_count; ++c) {
    bound = std::max(bound, design.columns[c].bound);
  }
  switch (term.kind) {
    case TermKind::kNumeric:
      CheckColumn(profile, term.source_column, "column");
      return;
    case TermKind::kPower: {
      CheckColumn(profile, term.source_column, "column");
      if (!Outside(bound) && std::isfinite(bound)) return;
      const ColumnProfile* column = profile.Find(term.source_column);
      if (column == nullptr) return;
      const long double power =
          std::pow(static_cast<long double>(std::fabs(LargestValue(*column))), term.degree);
      throw PlanError(term.key_path,
                      "power term " + Quote(term.name) + " raises column " + Quote(column->name) +
                          " to the power " + std::to_string(term.degree) + ": its largest value " +
                          ValueText(*column) + " (" + Where(profile, *column) + ") becomes " +
                          Magnitude(power) + ", " + Remedy(power, "the column or lower the degree"));
    }
    case TermKind::kProduct: {
      if (!Outside(bound)) return;
      std::string parts;
      for (std::size_t part : term.parts) {
        const DesignTerm& factor = design.terms[part];
        double part_bound = 0;
        for (std::size_t c = factor.first_column; c < factor.first_column + factor.column_count; ++c) {
          part_bound = std::max(part_bound, design.columns[c].bound);
        }
        // A log term over a column with values <= 0 has no finite bound; its rows fail later,
        // naming the cell.
        if (!std::isfinite(part_bound)) return;
        parts += (parts.empty() ? "" : " and ") + Quote(factor.name) + " (up to " + Magnitude(part_bound);
        if (factor.kind == TermKind::kNumeric || factor.kind == TermKind::kPower) {
          if (const ColumnProfile* column = profile.Find(factor.source_column)) {
            parts += " from " + ValueText(*column) + " at " + Where(profile, *column);
          }
        }
        parts += ")";
      }
      throw PlanError(term.key_path, "product term " + Quote(term.name) + " multiplies " + parts +
                                         ": its values can reach " + Magnitude(bound) + ", " +
                                         Remedy(bound, "the columns of its parts"));
    }
    case TermKind::kLog:
    case TermKind::kCategorical:
      return;  // |ln x| <= 745 and is 0 or >= 1e-16; indicators are 0 or 1
  }
}

}  // namespace

void CheckMagnitudes(const Design& design, const DataProfile& profile) {
  if (design.response_transform == ResponseTransform::kNone) {
    CheckColumn(profile, design.response, "response");
  }
  if (design.weights) CheckColumn(profile, *design.weights, "weights column");
  for (std::size_t index : design.source.evaluation_order) CheckTerm(design, profile, index);
}

}  // namespace stepledger::design_detail
