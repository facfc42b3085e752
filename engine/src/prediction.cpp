#include "stepledger/engine/prediction.h"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <map>
#include <stdexcept>
#include <utility>

#include <boost/math/distributions/students_t.hpp>

#include "stepledger/engine/errors.h"
#include "stepledger/engine/number_format.h"

namespace stepledger {
namespace {

std::string Quote(std::string_view text) { return "'" + QuoteForMessage(text) + "'"; }

}  // namespace

const char* ToString(PredictionFlag flag) {
  switch (flag) {
    case PredictionFlag::kMissing: return "missing";
    case PredictionFlag::kUnknownLevel: return "unknown-level";
    case PredictionFlag::kInvalidValue: return "invalid-value";
    case PredictionFlag::kOutsideRange: return "outside-range";
    case PredictionFlag::kHiddenExtrapolation: return "hidden-extrapolation";
  }
  return "?";
}

std::string RowProblem::Describe() const {
  const std::string needed_by = term.empty() ? std::string(" (the weights)") : " (term " + Quote(term) + ")";
  switch (flag) {
    case PredictionFlag::kMissing:
      return column + " is missing" + needed_by;
    case PredictionFlag::kUnknownLevel:
      return column + ": level " + Quote(text) + " was not in the fitted data" + needed_by;
    case PredictionFlag::kInvalidValue:
      return column + ": " + Quote(text) + " " + (reason.empty() ? "is not usable" : reason) + needed_by;
    default:
      return column;
  }
}

std::string OutsideRange::Describe() const {
  switch (kind) {
    case TermKind::kLog:
      return column + " = " + FormatQuantity(value) + " outside [" + FormatQuantity(min) + ", " +
             FormatQuantity(max) + "] (log term " + Quote(term) + ")";
    case TermKind::kPower:
      return column + "^" + std::to_string(degree) + " = " + FormatQuantity(value) + " outside [" +
             FormatQuantity(min) + ", " + FormatQuantity(max) + "] (power term " + Quote(term) + ")";
    default:
      return column + " = " + FormatQuantity(value) + " outside [" + FormatQuantity(min) + ", " +
             FormatQuantity(max) + "]";
  }
}

bool PredictedRow::Has(PredictionFlag flag) const {
  return std::find(flags.begin(), flags.end(), flag) != flags.end();
}

std::string PredictedRow::Detail() const {
  std::string text;
  auto append = [&](const std::string& part) {
    if (!text.empty()) text += "; ";
    text += part;
  };
  for (const PredictionFlag flag : flags) {
    std::string part = std::string(ToString(flag)) + ": ";
    bool first = true;
    auto add = [&](const std::string& item) {
      part += (first ? "" : ", ") + item;
      first = false;
    };
    switch (flag) {
      case PredictionFlag::kMissing:
      case PredictionFlag::kUnknownLevel:
      case PredictionFlag::kInvalidValue:
        for (const RowProblem& problem : problems) {
          if (problem.flag == flag) add(problem.Describe());
        }
        break;
      case PredictionFlag::kOutsideRange:
        for (const OutsideRange& outside : outside_range) add(outside.Describe());
        break;
      case PredictionFlag::kHiddenExtrapolation:
        add("leverage " + FormatQuantity(leverage.value_or(0)) + " is above " +
            FormatQuantity(max_fitted_leverage.value_or(0)) +
            ", the largest among the fitted rows, though every column is in range");
        break;
    }
    append(part);
  }
  return text;
}

// ---- the row evaluator ----------------------------------------------------------------------

PredictionRowEvaluator::PredictionRowEvaluator(const Design& design, const CsvReader& reader)
    : PredictionRowEvaluator(design, reader.header(), reader.display_name(), &reader) {}

PredictionRowEvaluator::PredictionRowEvaluator(const Design& design, const ColumnRows& rows)
    : PredictionRowEvaluator(design, rows.header(), rows.display_name(), nullptr) {}

PredictionRowEvaluator::PredictionRowEvaluator(const Design& design, const std::vector<std::string>& header,
                                               const std::string& name, const CsvReader* reader)
    : design_(&design), reader_(reader), display_name_(&name) {
  const auto& cells = design.source.cells;
  cell_header_.assign(cells.size(), -1);
  cell_term_.assign(cells.size(), std::string());
  // Plan order, so that the term named in a message is the first one needing the column.
  for (std::size_t t = 0; t < design.terms.size(); ++t) {
    const std::ptrdiff_t cell = design.source.term_cell[t];
    if (cell < 0) continue;
    const auto c = static_cast<std::size_t>(cell);
    if (!cell_term_[c].empty()) continue;
    cell_term_[c] = design.terms[t].name;
    const std::ptrdiff_t header_index = HeaderIndex(header, cells[c].column_name);
    if (header_index < 0) {
      // A file read with the wrong delimiter has one long column: say so.
      const std::optional<std::string> separator_hint =
          reader == nullptr ? std::nullopt : SeparatorHint(header.size(), header.empty() ? "" : header.front());
      throw InputError(name + ": no column " + Quote(cells[c].column_name) + " in the header; term " +
                       Quote(design.terms[t].name) + " of the model needs it" +
                       (separator_hint ? "; " + *separator_hint : std::string()));
    }
    cell_header_[c] = header_index;
  }
  if (design.weights) weights_header_ = HeaderIndex(header, *design.weights);
}

EvaluatedRow PredictionRowEvaluator::Evaluate(const CsvRecord& record) const {
  if (reader_ == nullptr) {
    throw std::logic_error("PredictionRowEvaluator: a CSV record given to an evaluator bound to columns (a bug)");
  }
  return Evaluate(CsvRowCells(*reader_, record));
}

EvaluatedRow PredictionRowEvaluator::Evaluate(const RowCells& source) const {
  const Design& design = *design_;
  const auto& cells = design.source.cells;
  EvaluatedRow row;
  row.row_index = source.row_index();
  row.line = source.line();
  row.cell_values.assign(cells.size(), 0.0);
  row.cell_places.assign(cells.size(), CellPlace{});
  row.file = *display_name_;
  std::vector<std::size_t> cell_levels(cells.size(), kNoTerm);

  auto problem = [&](PredictionFlag flag, const std::string& column, const std::string& term, const RowCell& cell,
                     std::string reason) {
    row.problems.push_back({flag, column, term,
                            flag == PredictionFlag::kMissing ? std::string() : std::string(cell.text),
                            FormatLocation(*display_name_, cell.place.line, cell.place.column), std::move(reason)});
  };

  for (std::size_t c = 0; c < cells.size(); ++c) {
    if (cell_header_[c] < 0) continue;
    const Design::Source::Cell& design_cell = cells[c];
    const RowCell cell = source.Cell(static_cast<std::size_t>(cell_header_[c]));
    if (cell.kind == CellKind::kMissing) {
      // A column read both as numbers and as levels is missing once.
      const bool listed = std::any_of(row.problems.begin(), row.problems.end(), [&](const RowProblem& p) {
        return p.flag == PredictionFlag::kMissing && p.column == design_cell.column_name;
      });
      if (!listed) problem(PredictionFlag::kMissing, design_cell.column_name, cell_term_[c], cell, "");
      continue;
    }
    if (design_cell.categorical) {
      const auto& levels = design.source.level_index[design_cell.term];
      const auto level = levels.find(cell.text);
      if (level == levels.end()) {
        problem(PredictionFlag::kUnknownLevel, design_cell.column_name, cell_term_[c], cell, "");
      } else {
        cell_levels[c] = level->second;
      }
      continue;
    }
    if (cell.kind != CellKind::kNumber) {
      problem(PredictionFlag::kInvalidValue, design_cell.column_name, cell_term_[c], cell,
              cell.kind == CellKind::kNonFinite ? "is not a finite number" : "is not a number");
      continue;
    }
    row.cell_values[c] = cell.number;
    row.cell_places[c] = cell.place;
  }

  if (weights_header_ >= 0) {
    const RowCell cell = source.Cell(static_cast<std::size_t>(weights_header_));
    if (cell.kind == CellKind::kNumber && cell.number > 0) {
      row.weight = cell.number;
    } else if (cell.kind != CellKind::kMissing) {
      // A zero weight would make the prediction interval infinite; text or a negative
      // weight is a mistake in the file.
      problem(PredictionFlag::kInvalidValue, *design.weights, "", cell, "is not a positive weight");
    }
  }

  if (!row.problems.empty()) return row;

  row.x.assign(design.column_count(), 0.0);
  if (design.EvaluateTerms(row.cell_values, cell_levels, row.x) == kNoTerm) return row;
  // Some value under a log is not positive: list every such column, not only the first.
  for (std::size_t t = 0; t < design.terms.size(); ++t) {
    const DesignTerm& term = design.terms[t];
    if (term.kind != TermKind::kLog) continue;
    const auto c = static_cast<std::size_t>(design.source.term_cell[t]);
    if (row.cell_values[c] > 0) continue;
    const bool listed = std::any_of(row.problems.begin(), row.problems.end(),
                                    [&](const RowProblem& p) { return p.column == cells[c].column_name; });
    if (listed) continue;
    problem(PredictionFlag::kInvalidValue, cells[c].column_name, term.name,
            source.Cell(static_cast<std::size_t>(cell_header_[c])), "is not positive, and a log term needs a value > 0");
  }
  row.x.clear();
  return row;
}

// ---- the arithmetic -------------------------------------------------------------------------

void PredictionOptions::Validate() const {
  if (!(level > 0 && level < 1)) {
    throw InputError("level: expected a number strictly between 0 and 1, found " + FormatQuantity(level));
  }
  if (!(leverage_tolerance >= 0) || !std::isfinite(leverage_tolerance)) {
    throw InputError("leverage_tolerance: expected a finite number >= 0, found " +
                     FormatQuantity(leverage_tolerance));
  }
}

Predictor::Predictor(PricingModel model, PredictionOptions options)
    : model_(std::move(model)), options_(options) {
  options_.Validate();
  const FitResult& fit = model_.fit;
  const std::size_t k = fit.columns.size();
  if (model_.column_names.size() != k || fit.beta.n_elem != k || fit.model_triangle.n_rows != k ||
      fit.model_scales.size() != k + 1) {
    throw std::invalid_argument("Predictor: the fit carries no model factor, or column_names does not match it");
  }
  std::map<std::string, std::size_t, std::less<>> column_by_name;
  for (std::size_t c = 0; c < model_.design.columns.size(); ++c) {
    column_by_name.emplace(model_.design.columns[c].name, c);
  }
  for (const std::string& name : model_.column_names) {
    const auto found = column_by_name.find(name);
    if (found == column_by_name.end()) {
      throw InputError("the model's column " + Quote(name) +
                       " is not a column of the design rebuilt from the plan");
    }
    model_columns_.push_back(found->second);
  }
  for (const TermValueRange& range : model_.ranges) {
    const std::size_t term = model_.design.FindTerm(range.term);
    if (term == kNoTerm) continue;
    const TermKind kind = model_.design.terms[term].kind;
    if (kind != TermKind::kNumeric && kind != TermKind::kLog && kind != TermKind::kPower) continue;
    ranges_.push_back({term, model_.design.source.term_cell[term], range.min, range.max});
  }
  const double df = fit.df_residual;
  if (df > 0) {
    const boost::math::students_t distribution(df);
    t_quantile_ = boost::math::quantile(boost::math::complement(distribution, (1 - options_.level) / 2));
  }
}

PredictedRow Predictor::Predict(const EvaluatedRow& row) const {
  PredictedRow result;
  result.row_index = row.row_index;
  result.line = row.line;
  result.weight = row.weight;
  auto flag = [&](PredictionFlag value) {
    if (!result.Has(value)) result.flags.push_back(value);
  };
  if (!row.ok()) {
    result.problems = row.problems;
    for (const PredictionFlag value : kAllPredictionFlags) {
      const bool present = std::any_of(row.problems.begin(), row.problems.end(),
                                       [&](const RowProblem& problem) { return problem.flag == value; });
      if (present) flag(value);
    }
    return result;
  }

  const FitResult& fit = model_.fit;
  const std::size_t k = model_columns_.size();
  std::vector<double> model_x(k), scratch(k);
  for (std::size_t j = 0; j < k; ++j) model_x[j] = row.x[model_columns_[j]];
  const double prediction = LinearPredictor(fit, model_x);
  const double leverage = UnitLeverage(fit, model_x, scratch);
  result.prediction = prediction;
  result.leverage = leverage;
  result.max_fitted_leverage = model_.max_unit_leverage;

  const std::optional<double> sigma = fit.criteria.sigma;
  if (sigma && t_quantile_) {
    result.se_mean = *sigma * std::sqrt(leverage);
    const double ci_half = *t_quantile_ * *result.se_mean;
    const double pi_half = *t_quantile_ * *sigma * std::sqrt(1 / row.weight + leverage);
    result.ci = PredictionInterval{prediction - ci_half, prediction + ci_half};
    result.pi = PredictionInterval{prediction - pi_half, prediction + pi_half};
  }

  // outside-range: one entry per column, in the order of the ranges.
  for (const RangeCheck& range : ranges_) {
    const DesignTerm& term = model_.design.terms[range.term];
    const double value = row.x[term.first_column];
    if (value >= range.min && value <= range.max) continue;
    const bool listed = std::any_of(result.outside_range.begin(), result.outside_range.end(),
                                    [&](const OutsideRange& outside) { return outside.column == term.source_column; });
    if (listed) continue;
    OutsideRange outside{term.source_column, term.name, term.kind, term.degree, value, range.min, range.max};
    if (term.kind == TermKind::kLog) {
      outside.value = row.cell_values[static_cast<std::size_t>(range.cell)];
      outside.min = std::exp(range.min);
      outside.max = std::exp(range.max);
    }
    result.outside_range.push_back(std::move(outside));
  }
  if (!result.outside_range.empty()) flag(PredictionFlag::kOutsideRange);
  if (result.outside_range.empty() && model_.max_unit_leverage &&
      leverage > *model_.max_unit_leverage * (1 + options_.leverage_tolerance)) {
    flag(PredictionFlag::kHiddenExtrapolation);
  }

  if (model_.design.response_transform == ResponseTransform::kLog) {
    BackTransformed back;
    back.median = std::exp(prediction);
    if (result.ci) back.ci = PredictionInterval{std::exp(result.ci->low), std::exp(result.ci->high)};
    if (result.pi) back.pi = PredictionInterval{std::exp(result.pi->low), std::exp(result.pi->high)};
    if (model_.smearing_factor) back.mean = back.median * *model_.smearing_factor;
    result.back = back;
  }
  if (!AllFinite(result)) return TooFarOut(row, std::move(result));
  return result;
}

// Every number of a priced row is a finite double (values far outside the fitted data can
// overflow x'b, the leverage's sum of squares, the intervals or exp of them).
bool Predictor::AllFinite(const PredictedRow& row) {
  auto finite = [](const std::optional<double>& value) { return !value || std::isfinite(*value); };
  auto finite_interval = [](const std::optional<PredictionInterval>& interval) {
    return !interval || (std::isfinite(interval->low) && std::isfinite(interval->high));
  };
  if (!finite(row.prediction) || !finite(row.leverage) || !finite(row.se_mean) || !finite_interval(row.ci) ||
      !finite_interval(row.pi)) {
    return false;
  }
  if (row.back) {
    const BackTransformed& back = *row.back;
    if (!std::isfinite(back.median) || !finite_interval(back.ci) || !finite_interval(back.pi) || !finite(back.mean)) {
      return false;
    }
  }
  return true;
}

// The row unpriced: an invalid-value problem for each column outside its fitted range (each
// numeric column of the model when none is), its numbers dropped.
PredictedRow Predictor::TooFarOut(const EvaluatedRow& row, PredictedRow priced) const {
  PredictedRow result;
  result.row_index = priced.row_index;
  result.line = priced.line;
  result.weight = priced.weight;
  const auto& cells = model_.design.source.cells;
  auto add_problem = [&](std::size_t cell, const std::string& term) {
    const std::string& column = cells[cell].column_name;
    const bool listed = std::any_of(result.problems.begin(), result.problems.end(),
                                    [&](const RowProblem& problem) { return problem.column == column; });
    if (listed) return;
    char text[32];
    const auto written = std::to_chars(text, text + sizeof text, row.cell_values[cell]);
    const CellPlace place = cell < row.cell_places.size() ? row.cell_places[cell] : CellPlace{row.line, 0};
    result.problems.push_back({PredictionFlag::kInvalidValue, column, term,
                               std::string(text, static_cast<std::size_t>(written.ptr - text)),
                               FormatLocation(row.file, place.line, place.column),
                               "is too far outside the fitted data to price: the prediction or its interval "
                               "would pass the largest double (about 1.8e308)"});
  };
  for (const OutsideRange& outside : priced.outside_range) {
    const std::size_t term = model_.design.FindTerm(outside.term);
    if (term == kNoTerm || model_.design.source.term_cell[term] < 0) continue;
    add_problem(static_cast<std::size_t>(model_.design.source.term_cell[term]), outside.term);
  }
  if (result.problems.empty()) {
    for (std::size_t t = 0; t < model_.design.terms.size(); ++t) {
      const std::ptrdiff_t cell = model_.design.source.term_cell[t];
      if (cell < 0 || cells[static_cast<std::size_t>(cell)].categorical) continue;
      add_problem(static_cast<std::size_t>(cell), model_.design.terms[t].name);
    }
  }
  result.flags.push_back(PredictionFlag::kInvalidValue);
  return result;
}

}  // namespace stepledger
