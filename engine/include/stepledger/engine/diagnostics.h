#pragma once
// Per-row diagnostics of a fitted model (fitted value, residual, leverage, standardised residual,
// Cook's distance), computed in one pass over the rows and summarised in memory that does not
// grow with them: the used-row count, PRESS, the largest leverage, the rows that stand out
// counted by reason, the kDiagnosticsTopRows rows with the largest leverage, |Cook's distance|
// and |standardised residual|, and the binned views the report draws (a histogram of
// standardised residuals, a density of residuals against fitted values, the largest Cook's
// distance per range of line numbers, quantiles of the standardised residuals against the
// normal). Every row is also handed, in file order, to an optional observer (`report
// --rows-out` streams the rows that stand out through it).
//
// Binning. The standardised residuals have a known scale (about N(0, 1) under the model), so
// their histogram has fixed bins on [-8, 8] and rows beyond fall into the end bins. Fitted
// values, residuals and line numbers have no scale known before the pass: their axes start
// narrow around the first value and, when a value falls outside, double their width by merging
// pairs of neighbouring bins (toward the side of that value) until it fits. Counts are never
// split or estimated, so they always sum to the rows binned, and a given row order always gives
// the same bins. The covered range stays within a small factor of the data's range.
//
// Quantiles: Boost.Accumulators' extended P-square estimator (a streaming sketch of a fixed set
// of probabilities) beyond kDiagnosticsExactQuantileRows rows; up to that many the values are
// kept and the quantiles are exact (linear interpolation between order statistics,
// Hyndman-Fan type 7, common practice).
//
// Cost: O(n k^2) time, O(k + kDiagnosticsTopRows + bins) memory, whatever n.

#include <cstddef>
#include <cstdint>
#include <functional>
#include <memory>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/fit.h"

namespace stepledger {

/// Rows kept in each largest-first list of DiagnosticsResult.
inline constexpr std::size_t kDiagnosticsTopRows = 50;
/// Up to this many rows, the standardised residuals are kept and their quantiles are exact.
inline constexpr std::uint64_t kDiagnosticsExactQuantileRows = 5000;
/// Bins of the growing axes (fitted values and residuals of the density: each; line numbers).
inline constexpr std::size_t kDensityAxisBins = 256;
inline constexpr std::size_t kLineAxisBins = 1024;
/// The standardised-residual histogram: bins of width 1/16 on [-8, 8].
inline constexpr double kStandardizedHistogramLimit = 8;
inline constexpr std::size_t kStandardizedHistogramBins = 256;

struct RowDiagnostic {
  std::uint64_t row_index = 0;  ///< 0-based data record index in the file
  std::uint64_t line = 0;       ///< 1-based line where the record starts, in its own file
  std::size_t file = 0;         ///< the data set's file it is in (UsedRow::file; 0 for one file)
  double fitted = 0;
  double residual = 0;        ///< y - fitted (unweighted)
  double leverage = 0;        ///< h_ii = w_i x_i' (X'WX)^-1 x_i
  std::optional<double> standardized_residual;  ///< sqrt(w) e / (sigma sqrt(1 - h)); undefined when h = 1 or sigma = 0
  std::optional<double> cooks_distance;         ///< r^2 h / (k (1 - h))
  bool operator==(const RowDiagnostic&) const = default;
};

/// Thresholds for rows that stand out (common practice, no single source: Cook's distance
/// above 4/n, |standardised residual| above 3, leverage above twice its mean k/n). All three
/// are known from the fit before the diagnostics pass.
struct StandOutThresholds {
  double cooks = 0;
  double standardized_residual = 3;
  double leverage = 0;
  static StandOutThresholds CommonPractice(std::uint64_t n, std::size_t k);
  bool CooksAbove(const RowDiagnostic& row) const;
  bool StandardizedResidualAbove(const RowDiagnostic& row) const;
  bool LeverageAbove(const RowDiagnostic& row) const;
  /// Leverage 1 (no standardised residual) or any threshold crossed.
  bool StandsOut(const RowDiagnostic& row) const;
};

/// Orders of the largest-first lists: the larger value first, an undefined value (leverage 1:
/// the row fits itself) before every defined one, ties by row_index (so the lists are
/// deterministic).
bool LargerLeverageFirst(const RowDiagnostic& a, const RowDiagnostic& b);
bool LargerCooksDistanceFirst(const RowDiagnostic& a, const RowDiagnostic& b);
bool LargerStandardizedResidualFirst(const RowDiagnostic& a, const RowDiagnostic& b);

/// One axis of regular bins [lo + i width, lo + (i + 1) width), i < bins, that grows (see the
/// top of this file). Started by the first finite value, which lands in the middle bin.
struct GrowingAxis {
  std::size_t bins = 0;  ///< even, >= 2
  double lo = 0;
  double width = 0;      ///< 0 until started
  bool started() const { return width > 0; }
  double hi() const { return lo + width * static_cast<double>(bins); }
  /// The bin of value (clamped to the end bins).
  std::size_t BinOf(double value) const;
};

/// Counts of value pairs on a grid of two growing axes; row-major (y rows of x columns).
struct GrowingDensity {
  GrowingAxis x, y;
  std::vector<std::uint64_t> counts;
  std::uint64_t total = 0;
  GrowingDensity(std::size_t x_bins, std::size_t y_bins);
  /// Counts (x_value, y_value); pairs with a non-finite value are not counted.
  void Add(double x_value, double y_value);
};

/// The largest Cook's distance in each range of line numbers (rows with a defined distance), or
/// of record numbers (1-based, across the files) for a data set of several files, whose lines
/// restart in every file.
struct LineBinnedCooks {
  GrowingAxis lines;
  std::vector<std::optional<RowDiagnostic>> largest;
  bool by_record = false;
  explicit LineBinnedCooks(std::size_t bins, bool by_record = false);
  /// Where a row sits on the axis: its line, or its record number when by_record.
  double PositionOf(const RowDiagnostic& row) const;
  void Add(const RowDiagnostic& row);
};

/// One quantile of the standardised residuals beside the standard normal's at that probability.
struct NormalQuantile {
  double probability = 0;
  double normal = 0;  ///< Phi^-1(probability)
  double sample = 0;  ///< estimated (exact up to kDiagnosticsExactQuantileRows rows)
};

/// The fixed probabilities of the quantile plot, ascending.
const std::vector<double>& NormalQuantileProbabilities();

struct DiagnosticsResult {
  std::uint64_t rows = 0;           ///< used rows diagnosed
  std::optional<double> press;      ///< sum w (e / (1 - h))^2; undefined when some h = 1
  double max_leverage = 0;
  std::uint64_t max_leverage_line = 0;  ///< its line (the first such row); 0 without rows
  std::size_t max_leverage_file = 0;    ///< its file of a data set (RowDiagnostic::file)
  std::uint64_t leverage_one_rows = 0;  ///< rows with h = 1 (no standardised residual)
  double weighted_residual_sum_of_squares = 0;  ///< sum w e^2 (a check against the fit's RSS)

  StandOutThresholds thresholds;
  std::uint64_t cooks_above = 0;                  ///< Cook's distance above thresholds.cooks
  std::uint64_t standardized_residual_above = 0;  ///< |standardised residual| above 3
  std::uint64_t leverage_above = 0;               ///< leverage above thresholds.leverage
  std::uint64_t stand_out = 0;                    ///< rows crossing any threshold or with h = 1

  /// At most kDiagnosticsTopRows each, largest first (the orders above).
  std::vector<RowDiagnostic> largest_leverage;
  std::vector<RowDiagnostic> largest_cooks_distance;
  std::vector<RowDiagnostic> largest_standardized_residual;

  /// Standardised residuals in kStandardizedHistogramBins bins on [-8, 8], values beyond in the
  /// end bins; counts sum to rows - standardized_residual_undefined.
  std::vector<std::uint64_t> standardized_histogram;
  std::uint64_t standardized_residual_undefined = 0;
  double largest_abs_standardized_residual = 0;
  /// Residual (y) against fitted value (x); counts sum to rows (when both are finite).
  GrowingDensity fitted_residual_density{kDensityAxisBins, kDensityAxisBins};
  LineBinnedCooks cooks_by_line{kLineAxisBins};
  /// Empty when no row has a standardised residual.
  std::vector<NormalQuantile> normal_quantiles;
};

/// Folds RowDiagnostic values one at a time (in file order) into a DiagnosticsResult.
/// ComputeDiagnostics uses it; tests and simulations can feed rows of their own.
class DiagnosticsAccumulator {
 public:
  /// by_record: the Cook's distance chart by record number (a data set of several files).
  explicit DiagnosticsAccumulator(StandOutThresholds thresholds, bool by_record = false);
  ~DiagnosticsAccumulator();
  DiagnosticsAccumulator(const DiagnosticsAccumulator&) = delete;
  DiagnosticsAccumulator& operator=(const DiagnosticsAccumulator&) = delete;
  /// weight: the row's weight (for PRESS and the weighted sum of squares).
  void Add(const RowDiagnostic& row, double weight = 1);
  /// The summary of the rows added; the accumulator is spent afterwards.
  DiagnosticsResult Finish();

 private:
  struct State;
  std::unique_ptr<State> state_;
};

struct DiagnosticsOptions {
  /// Called with every row, in file order, as soon as it is diagnosed (`report --rows-out`
  /// streams through it). Default: none.
  std::function<void(const RowDiagnostic&)> row_observer;
  /// The data are a set of several files: Cook's distances are binned by record number across
  /// the set (cooks_by_line.by_record), since each file's lines start again at 1. Default: no.
  bool rows_by_record = false;
};

/// The per-row part of the diagnostics: what one row's diagnostic needs of the fit (the model's
/// design columns, estimates, factor and scales, the residual SD), copied so that it can travel
/// as bytes to the process that holds the row. Throws std::invalid_argument when the fit carries
/// no model factor (not made by FitModel).
class RowDiagnoser {
 public:
  explicit RowDiagnoser(const FitResult& fit);
  /// The row's fitted value, residual, leverage, standardised residual and Cook's distance.
  RowDiagnostic Diagnose(const UsedRow& row);
  /// The row's prediction x'b (LinearPredictor) and, when the model has terms, its leverage at
  /// unit weight x'(X'WX)^-1 x (UnitLeverage; nullopt for an empty model).
  double Prediction(const UsedRow& row);
  std::optional<double> UnitLeverageOf(const UsedRow& row);
  std::string Write() const;
  /// Bytes that Write made (a short message is a std::logic_error: a bug).
  static RowDiagnoser Read(std::string_view bytes);

 private:
  RowDiagnoser() = default;
  std::span<const double> ModelValues(const UsedRow& row);
  FitResult model_;  // only columns, beta, model_triangle, model_scales and criteria.sigma are set
  std::vector<double> model_x_, scratch_;
};

/// The smallest and largest values of some design columns over the rows visited (infinite
/// bounds, low > high, before the first row).
struct ColumnExtents {
  std::vector<double> low, high;
  explicit ColumnExtents(std::size_t columns = 0);
  /// Widens by one row's values of `columns` (design column indices, one per extent).
  void Widen(std::span<const std::size_t> columns, std::span<const double> x);
  /// Widens by another part's extents (the order of parts does not matter).
  void Widen(const ColumnExtents& other);
};

/// The used rows diagnosed where they lie, handed to `visit` in record order with their weights:
/// the plain form diagnoses this process's replay; a run shared by processes has every process
/// diagnose its own rows and sends process 0 the diagnostics, not the rows (run/src/shared_run.h).
/// Returns the extents of `extent_columns` over the rows.
using DiagnosingReplay = std::function<ColumnExtents(const RowDiagnoser& diagnoser,
                                                     std::span<const std::size_t> extent_columns,
                                                     const std::function<void(const RowDiagnostic&, double weight)>& visit)>;

/// The rows of `replay`, diagnosed by this process.
DiagnosingReplay DiagnoseHere(RowReplay replay);

/// One more pass over the rows for the diagnostics of a fitted model; the stand-out
/// thresholds are StandOutThresholds::CommonPractice(fit.n, fit.k). Throws
/// std::invalid_argument when the fit carries no model factor (not made by FitModel).
DiagnosticsResult ComputeDiagnostics(const FitResult& fit, const Design& design, const RowReplay& replay,
                                     const DiagnosticsOptions& options = {});
/// The same over rows diagnosed wherever they lie (the accumulation runs here, in record order,
/// so the result is the same bits whoever diagnosed the rows).
DiagnosticsResult ComputeDiagnostics(const FitResult& fit, const DiagnosingReplay& rows,
                                     const DiagnosticsOptions& options = {});

}  // namespace stepledger
