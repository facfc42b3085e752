#pragma once
// Pricing new rows with a fitted model: the prediction x0'b, its standard error, the
// confidence interval of the mean and the prediction interval of one new observation, and the
// flags that say when a row is an extrapolation or cannot be priced at all.
//
// Two steps, so that reading and arithmetic can be tested apart:
//  1. PredictionRowEvaluator, bound to a header (a CsvReader's, or the column names of data in
//     memory, engine/row_cells.h), turns each row into the design row x0 (through Design::EvaluateTerms, the same code that expands the fitted rows) or into
//     problems: `missing` (an empty/NA cell), `unknown-level` (a level the fitted data did not
//     have), `invalid-value` (text or a non-finite number in a numeric column, a non-positive
//     value under a log, a weight that is not a positive number). A problem is a per-row
//     outcome, never an exception: one bad row does not stop the batch; the row gets no
//     prediction and says why.
//  2. Predictor computes, for a row without problems (sources: any regression text, e.g. the
//     standard formulas for the variance of a predicted mean and of a new observation):
//       prediction  = x0'b                              (double-double sum, LinearPredictor)
//       h0          = x0'(X'WX)^-1 x0 = ||R11^-T D x0||^2  (UnitLeverage: the leverage at unit
//                                                         weight, exactly as the diagnostics)
//       se_mean     = sigma sqrt(h0)
//       ci          = prediction -+ t(1 - (1 - level)/2; n - k) se_mean
//       se_obs      = sigma sqrt(1/w0 + h0),  pi = prediction -+ t se_obs
//     where w0 is the row's precision weight: the plan's weights column when the rows hold it
//     (an empty or NA cell counts as 1), else 1, i.e. the new observation is taken to be as
//     precise as a fitted row of weight w0. Intervals are undefined when sigma is (n <= k).
//     With a logged response the numbers above are on the log scale, and the row also gets
//     exp(prediction) (the median of the response under normal errors on the log scale),
//     exp of the interval bounds (intervals for the median and for a new response), and the
//     smearing estimate of the mean, exp(prediction) * mean_i exp(sqrt(w_i) e_i) (Duan's
//     smearing factor, computed over the fitted rows and recorded with the model).
//     Flags on priced rows: `outside-range` (a term's value lies outside the range of that
//     value over the fitted rows; every such column is listed), `hidden-extrapolation`
//     (h0 above the largest unit leverage among the fitted rows while every column is within
//     its range: the combination of values is far from the data).
//
// The engine knows no JSON and no audit: the command line fills a PricingModel from the audit
// (audit/fitted_model.h) and renders the rows.

#include <array>
#include <cstdint>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "stepledger/engine/csv.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/fit.h"
#include "stepledger/engine/row_cells.h"

namespace stepledger {

/// What can be said about a priced or refused row. The order here is the order flags are
/// listed in.
enum class PredictionFlag {
  kMissing,              ///< a needed cell is empty or NA: no prediction
  kUnknownLevel,         ///< a categorical cell holds a level the fitted data did not: no prediction
  kInvalidValue,         ///< text or a non-finite number in a numeric column, a value <= 0 under
                         ///< a log, a weight that is not a positive number, or values so far
                         ///< outside the fitted data that the prediction, its leverage or an
                         ///< interval is not a finite double: no prediction
  kOutsideRange,         ///< some term value lies outside its range over the fitted rows
  kHiddenExtrapolation,  ///< unit leverage above the largest fitted one, every column in range
};
inline constexpr std::array<PredictionFlag, 5> kAllPredictionFlags = {
    PredictionFlag::kMissing, PredictionFlag::kUnknownLevel, PredictionFlag::kInvalidValue,
    PredictionFlag::kOutsideRange, PredictionFlag::kHiddenExtrapolation};
/// "missing", "unknown-level", "invalid-value", "outside-range", "hidden-extrapolation".
const char* ToString(PredictionFlag flag);

/// Why a row cannot be priced (one per offending cell).
struct RowProblem {
  PredictionFlag flag = PredictionFlag::kMissing;  ///< kMissing, kUnknownLevel or kInvalidValue
  std::string column;  ///< the source column (or the weights column)
  std::string term;    ///< the first term (plan order) that needs the column; empty for the weights
  std::string text;    ///< the cell's text; empty for kMissing
  std::string where;   ///< file:line:column of the cell
  std::string reason;  ///< kInvalidValue: why ("not a number", "log needs a value > 0", ...)
  /// Human text, e.g. "grade: level 'Z' was not in the fitted data (term 'grade')".
  std::string Describe() const;
};

/// A record turned into the design row, or into the reasons it cannot be.
struct EvaluatedRow {
  std::uint64_t row_index = 0;  ///< 0-based data record index
  std::uint64_t line = 0;       ///< 1-based line where the record starts
  /// design.column_count() values (x0, unscaled); filled only when problems is empty.
  std::vector<double> x;
  /// Values of the design's source cells (indexed like Design::source.cells; numeric cells
  /// only), for saying out-of-range values on the column's own scale.
  std::vector<double> cell_values;
  /// Where each numeric cell of cell_values was read (same indexing), and the file: what a
  /// problem found by the Predictor (a value too far out to price) names.
  std::vector<CellPlace> cell_places;
  std::string_view file;
  double weight = 1;  ///< w0: the weights cell when the rows hold the weights column, else 1
  std::vector<RowProblem> problems;
  bool ok() const { return problems.empty(); }
};

/// Reads the cells a design needs from the rows of one CSV file or of columns in memory (its
/// header decides where); every row is read through RowCells (engine/row_cells.h), so that both
/// are priced by the same code. The response is not needed and not read; the weights column is
/// read when present.
class PredictionRowEvaluator {
 public:
  /// Binds to the reader's header. Throws InputError "FILE: no column 'C' in the header; term
  /// 'T' needs it" for the first source column of a term that the header lacks. The design and
  /// the reader must outlive the evaluator.
  PredictionRowEvaluator(const Design& design, const CsvReader& reader);
  /// Binds to the column names of data in memory ("memory: no column 'C' ..." as above). The
  /// design and the rows must outlive the evaluator.
  PredictionRowEvaluator(const Design& design, const ColumnRows& rows);

  /// The row's design values, or its problems (every offending cell is listed; `where` names a
  /// cell as "NAME:LINE:COLUMN", NAME the file's or the rows' display name).
  /// Cost: O(cells + design columns) and a few small allocations per row.
  EvaluatedRow Evaluate(const RowCells& cells) const;
  /// A record of the reader this evaluator was bound to (Evaluate(CsvRowCells(reader, record))).
  EvaluatedRow Evaluate(const CsvRecord& record) const;

  /// True when the rows have the plan's weights column (so w0 comes from it).
  bool reads_weights() const { return weights_header_ >= 0; }

 private:
  PredictionRowEvaluator(const Design& design, const std::vector<std::string>& header, const std::string& name,
                         const CsvReader* reader);
  const Design* design_;
  const CsvReader* reader_;          ///< null when bound to columns in memory
  const std::string* display_name_;  ///< the reader's or the rows' (outlives the evaluator)
  std::vector<std::ptrdiff_t> cell_header_;  ///< per design cell: header index; -1 when not read
  std::vector<std::string> cell_term_;       ///< per design cell: the first term needing it
  std::ptrdiff_t weights_header_ = -1;
};

struct PredictionOptions {
  /// Level of the confidence and prediction intervals, in (0, 1). Default 0.95.
  double level = 0.95;
  /// hidden-extrapolation needs h0 > max_unit_leverage * (1 + this), so that a row equal to the
  /// fitted row of largest leverage is not flagged for a rounding difference. Default 1e-9.
  double leverage_tolerance = 1e-9;
  /// Throws InputError naming the field ("level", "leverage_tolerance") when out of range.
  void Validate() const;
};

/// Range of one term's design value over the fitted rows (its value, its log, its power).
struct TermValueRange {
  std::string term;  ///< design term name
  double min = 0;
  double max = 0;
};

/// Everything pricing needs.
struct PricingModel {
  /// A design holding every term the model needs (its other terms are evaluated but unused):
  /// BuildDesign of the plan restricted to those terms, so that rows need not hold the
  /// columns of terms the model left out. Each coefficient's column is found by name.
  Design design;
  /// The fit: beta, columns (for k only), model_triangle, model_scales, criteria.sigma and
  /// df_residual are used.
  FitResult fit;
  /// Name of the design column of beta(j), model order (the intercept "intercept"): how each
  /// coefficient finds its column in `design`.
  std::vector<std::string> column_names;
  /// Ranges over the fitted rows of the numeric, log and power terms (terms not in design are
  /// ignored). Empty: no outside-range flags.
  std::vector<TermValueRange> ranges;
  /// Largest x_i'(X'WX)^-1 x_i over the fitted rows; unset: no hidden-extrapolation flags.
  std::optional<double> max_unit_leverage;
  /// With a logged response: mean over the fitted rows of exp(sqrt(w_i) e_i); unset: no mean.
  std::optional<double> smearing_factor;
};

/// A term value outside its fitted range. For numeric and log terms value, min and max are on
/// the column's own scale (a log term's bounds are exp of the recorded log bounds); for a power
/// term they are the power's (column^degree), because an even power has no single inverse.
struct OutsideRange {
  std::string column;
  std::string term;
  TermKind kind = TermKind::kNumeric;
  int degree = 1;  ///< kPower
  double value = 0;
  double min = 0;
  double max = 0;
  /// "age_months = 75 outside [2, 60]", "disk_gb = 4096 outside [64, 2048] (log term
  /// 'log_disk')", "age_months^2 = 5625 outside [4, 3600] (power term 'age2')".
  std::string Describe() const;
};

/// A row's prediction on the scale the model was fitted on (the log scale for a logged response).
struct PredictionInterval {
  double low = 0;
  double high = 0;
};

/// With a logged response: the numbers back on the response's own scale.
struct BackTransformed {
  double median = 0;                  ///< exp(prediction)
  std::optional<PredictionInterval> ci;  ///< exp of the confidence bounds (for the median)
  std::optional<PredictionInterval> pi;  ///< exp of the prediction bounds (for a new response)
  std::optional<double> mean;         ///< exp(prediction) * smearing factor; unset without one
};

struct PredictedRow {
  std::uint64_t row_index = 0;
  std::uint64_t line = 0;
  double weight = 1;  ///< w0 used for the prediction interval
  std::vector<PredictionFlag> flags;  ///< distinct, in kAllPredictionFlags order
  std::vector<RowProblem> problems;   ///< when not priced
  std::vector<OutsideRange> outside_range;  ///< one per column, in the order of the ranges
  // Set when the row is priced (no problems):
  std::optional<double> prediction;
  std::optional<double> leverage;     ///< h0 = x0'(X'WX)^-1 x0, the leverage at unit weight
  /// The largest unit leverage among the fitted rows (PricingModel::max_unit_leverage), for
  /// saying what h0 was compared with.
  std::optional<double> max_fitted_leverage;
  std::optional<double> se_mean;      ///< unset when sigma is undefined
  std::optional<PredictionInterval> ci;  ///< of the mean
  std::optional<PredictionInterval> pi;  ///< of one new observation of weight w0
  std::optional<BackTransformed> back;   ///< logged response only

  bool priced() const { return prediction.has_value(); }
  bool Has(PredictionFlag flag) const;
  /// Human text for the flags, "; "-separated ("" when there are none).
  std::string Detail() const;
};

class Predictor {
 public:
  /// Finds each coefficient's column in model.design by name and each range's term. Throws
  /// InputError when a coefficient's column is not in the design, std::invalid_argument when
  /// the fit carries no model factor or column_names does not match it, and validates the
  /// options.
  Predictor(PricingModel model, PredictionOptions options = {});

  const Design& design() const { return model_.design; }
  const PricingModel& model() const { return model_; }
  const PredictionOptions& options() const { return options_; }
  /// Student t quantile t(1 - (1 - level)/2; df_residual) (Boost.Math); unset when df <= 0.
  std::optional<double> t_quantile() const { return t_quantile_; }

  /// Prices one evaluated row (or passes its problems on). O(k^2). A row whose prediction,
  /// leverage, standard error or an interval (or its back-transform) is not a finite double
  /// is not priced: it gets an invalid-value problem for each column outside its fitted range
  /// (each numeric column of the model when none is), "is too far outside the fitted data to
  /// price", and none of the numbers.
  PredictedRow Predict(const EvaluatedRow& row) const;

 private:
  static bool AllFinite(const PredictedRow& row);
  PredictedRow TooFarOut(const EvaluatedRow& row, PredictedRow priced) const;
  struct RangeCheck {
    std::size_t term = kNoTerm;  ///< design term
    std::ptrdiff_t cell = -1;    ///< its source cell
    double min = 0, max = 0;
  };
  PricingModel model_;
  PredictionOptions options_;
  std::vector<std::size_t> model_columns_;  ///< design column of beta(j)
  std::vector<RangeCheck> ranges_;
  std::optional<double> t_quantile_;
};

}  // namespace stepledger
