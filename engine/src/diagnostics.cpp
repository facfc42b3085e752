#include "stepledger/engine/diagnostics.h"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <limits>
#include <stdexcept>
#include <string>

#include <boost/accumulators/accumulators.hpp>
#include <boost/accumulators/statistics/extended_p_square.hpp>
#include <boost/accumulators/statistics/stats.hpp>
#include <boost/math/distributions/normal.hpp>

#include "stepledger/engine/share_exchange.h"

namespace stepledger {

StandOutThresholds StandOutThresholds::CommonPractice(std::uint64_t n, std::size_t k) {
  StandOutThresholds thresholds;
  const double rows = std::max<double>(1, static_cast<double>(n));
  thresholds.cooks = 4.0 / rows;
  thresholds.leverage = 2.0 * static_cast<double>(k) / rows;
  thresholds.standardized_residual = 3;
  return thresholds;
}

bool StandOutThresholds::CooksAbove(const RowDiagnostic& row) const {
  return row.cooks_distance && *row.cooks_distance > cooks;
}

bool StandOutThresholds::StandardizedResidualAbove(const RowDiagnostic& row) const {
  return row.standardized_residual && std::abs(*row.standardized_residual) > standardized_residual;
}

bool StandOutThresholds::LeverageAbove(const RowDiagnostic& row) const { return row.leverage > leverage; }

bool StandOutThresholds::StandsOut(const RowDiagnostic& row) const {
  return !row.standardized_residual || CooksAbove(row) || StandardizedResidualAbove(row) || LeverageAbove(row);
}

namespace {

// a before b: the larger value first, undefined (infinite) before all, ties by row index.
bool LargerFirst(double a_value, double b_value, const RowDiagnostic& a, const RowDiagnostic& b) {
  if (a_value != b_value) return a_value > b_value;
  return a.row_index < b.row_index;
}

constexpr double kUndefinedRanksFirst = std::numeric_limits<double>::infinity();

}  // namespace

bool LargerLeverageFirst(const RowDiagnostic& a, const RowDiagnostic& b) {
  return LargerFirst(a.leverage, b.leverage, a, b);
}

bool LargerCooksDistanceFirst(const RowDiagnostic& a, const RowDiagnostic& b) {
  return LargerFirst(a.cooks_distance ? std::abs(*a.cooks_distance) : kUndefinedRanksFirst,
                     b.cooks_distance ? std::abs(*b.cooks_distance) : kUndefinedRanksFirst, a, b);
}

bool LargerStandardizedResidualFirst(const RowDiagnostic& a, const RowDiagnostic& b) {
  return LargerFirst(a.standardized_residual ? std::abs(*a.standardized_residual) : kUndefinedRanksFirst,
                     b.standardized_residual ? std::abs(*b.standardized_residual) : kUndefinedRanksFirst, a, b);
}

// ---- growing axes ----------------------------------------------------------------------------

std::size_t GrowingAxis::BinOf(double value) const {
  const double position = (value - lo) / width;
  if (!(position > 0)) return 0;
  return std::min(bins - 1, static_cast<std::size_t>(position));
}

namespace {

enum class Growth { kNone, kHigh, kLow };

// Starts the axis on its first value: that value in the middle bin, a width far below any
// spread worth drawing (2^-30 of the value's size), so that growth, not a guess, sets the range.
void Start(GrowingAxis& axis, double value) {
  axis.width = std::ldexp(value != 0 ? std::abs(value) : 1.0, -30);
  axis.lo = value - axis.width * static_cast<double>(axis.bins / 2);
}

// Limits the doublings for one value (a double's exponent range is about 2,100 doublings).
constexpr int kMaxGrowthSteps = 2200;

Growth NeedsGrowth(const GrowingAxis& axis, double value) {
  const double position = (value - axis.lo) / axis.width;
  if (position < 0) return Growth::kLow;
  if (position >= static_cast<double>(axis.bins)) return Growth::kHigh;
  return Growth::kNone;
}

// Doubles the axis width toward one side: bins 2i and 2i+1 become bin i (growing high) or
// bin bins/2 + i (growing low, the low edge moving down by the old range).
void Grow(GrowingAxis& axis, Growth growth) {
  if (growth == Growth::kLow) axis.lo -= axis.width * static_cast<double>(axis.bins);
  axis.width *= 2;
}

// The new index of an old bin after Grow.
std::size_t MergedIndex(std::size_t old_index, std::size_t bins, Growth growth) {
  return (growth == Growth::kLow ? bins / 2 : 0) + old_index / 2;
}

// Grows axis until value fits (or the step limit: then it lands in an end bin), calling
// merge(growth) after each doubling so the owner can merge its bins.
template <typename Merge>
void FitValue(GrowingAxis& axis, double value, Merge merge) {
  if (!axis.started()) Start(axis, value);
  for (int step = 0; step < kMaxGrowthSteps; ++step) {
    const Growth growth = NeedsGrowth(axis, value);
    if (growth == Growth::kNone || !std::isfinite(axis.width * 2) || !std::isfinite(axis.lo)) return;
    Grow(axis, growth);
    merge(growth);
  }
}

}  // namespace

GrowingDensity::GrowingDensity(std::size_t x_bins, std::size_t y_bins)
    : counts(x_bins * y_bins, 0) {
  assert(x_bins >= 2 && x_bins % 2 == 0 && y_bins >= 2 && y_bins % 2 == 0);
  x.bins = x_bins;
  y.bins = y_bins;
}

void GrowingDensity::Add(double x_value, double y_value) {
  if (!std::isfinite(x_value) || !std::isfinite(y_value)) return;
  std::vector<std::uint64_t> merged;
  FitValue(x, x_value, [&](Growth growth) {
    merged.assign(counts.size(), 0);
    for (std::size_t row = 0; row < y.bins; ++row) {
      for (std::size_t column = 0; column < x.bins; ++column) {
        merged[row * x.bins + MergedIndex(column, x.bins, growth)] += counts[row * x.bins + column];
      }
    }
    counts.swap(merged);
  });
  FitValue(y, y_value, [&](Growth growth) {
    merged.assign(counts.size(), 0);
    for (std::size_t row = 0; row < y.bins; ++row) {
      for (std::size_t column = 0; column < x.bins; ++column) {
        merged[MergedIndex(row, y.bins, growth) * x.bins + column] += counts[row * x.bins + column];
      }
    }
    counts.swap(merged);
  });
  ++counts[y.BinOf(y_value) * x.bins + x.BinOf(x_value)];
  ++total;
}

LineBinnedCooks::LineBinnedCooks(std::size_t bins, bool by_record) : largest(bins), by_record(by_record) {
  assert(bins >= 2 && bins % 2 == 0);
  lines.bins = bins;
}

double LineBinnedCooks::PositionOf(const RowDiagnostic& row) const {
  return static_cast<double>(by_record ? row.row_index + 1 : row.line);
}

void LineBinnedCooks::Add(const RowDiagnostic& row) {
  if (!row.cooks_distance || !std::isfinite(*row.cooks_distance)) return;
  const double line = PositionOf(row);
  std::vector<std::optional<RowDiagnostic>> merged;
  FitValue(lines, line, [&](Growth growth) {
    merged.assign(largest.size(), std::nullopt);
    for (std::size_t bin = 0; bin < largest.size(); ++bin) {
      if (!largest[bin]) continue;
      std::optional<RowDiagnostic>& slot = merged[MergedIndex(bin, lines.bins, growth)];
      if (!slot || LargerCooksDistanceFirst(*largest[bin], *slot)) slot = largest[bin];
    }
    largest.swap(merged);
  });
  std::optional<RowDiagnostic>& slot = largest[lines.BinOf(line)];
  if (!slot || LargerCooksDistanceFirst(row, *slot)) slot = row;
}

const std::vector<double>& NormalQuantileProbabilities() {
  static const std::vector<double> probabilities = {
      0.001, 0.0025, 0.005, 0.01, 0.02, 0.03, 0.05, 0.075, 0.1, 0.15, 0.2, 0.25, 0.3, 0.35, 0.4, 0.45, 0.5,
      0.55, 0.6, 0.65, 0.7, 0.75, 0.8, 0.85, 0.9, 0.925, 0.95, 0.97, 0.98, 0.99, 0.995, 0.9975, 0.999};
  return probabilities;
}

// ---- the accumulator -------------------------------------------------------------------------

namespace {

namespace acc = boost::accumulators;
using QuantileSketch = acc::accumulator_set<double, acc::stats<acc::tag::extended_p_square>>;

// A bounded list of the best rows under `before` (a heap whose front is the worst kept row, so
// each row costs O(log K)).
class TopRows {
 public:
  explicit TopRows(bool (*before)(const RowDiagnostic&, const RowDiagnostic&)) : before_(before) {}
  void Add(const RowDiagnostic& row) {
    if (heap_.size() < kDiagnosticsTopRows) {
      heap_.push_back(row);
      std::push_heap(heap_.begin(), heap_.end(), before_);
    } else if (before_(row, heap_.front())) {
      std::pop_heap(heap_.begin(), heap_.end(), before_);
      heap_.back() = row;
      std::push_heap(heap_.begin(), heap_.end(), before_);
    }
  }
  std::vector<RowDiagnostic> Sorted() && {
    std::sort_heap(heap_.begin(), heap_.end(), before_);
    return std::move(heap_);
  }

 private:
  bool (*before_)(const RowDiagnostic&, const RowDiagnostic&);
  std::vector<RowDiagnostic> heap_;
};

// Hyndman-Fan type 7 (common practice): linear interpolation between order statistics.
double ExactQuantile(const std::vector<double>& sorted, double probability) {
  const double h = (static_cast<double>(sorted.size()) - 1) * probability;
  const std::size_t below = static_cast<std::size_t>(std::floor(h));
  if (below + 1 >= sorted.size()) return sorted.back();
  return sorted[below] + (h - static_cast<double>(below)) * (sorted[below + 1] - sorted[below]);
}

}  // namespace

struct DiagnosticsAccumulator::State {
  DiagnosticsResult result;
  double press = 0;
  bool press_defined = true;
  TopRows leverage{LargerLeverageFirst};
  TopRows cooks{LargerCooksDistanceFirst};
  TopRows standardized{LargerStandardizedResidualFirst};
  QuantileSketch sketch{acc::tag::extended_p_square::probabilities = NormalQuantileProbabilities()};
  std::uint64_t standardized_count = 0;
  std::vector<double> kept_standardized;  // up to kDiagnosticsExactQuantileRows
  bool finished = false;
};

DiagnosticsAccumulator::DiagnosticsAccumulator(StandOutThresholds thresholds, bool by_record)
    : state_(std::make_unique<State>()) {
  state_->result.thresholds = thresholds;
  state_->result.cooks_by_line = LineBinnedCooks(kLineAxisBins, by_record);
  state_->result.standardized_histogram.assign(kStandardizedHistogramBins, 0);
}

DiagnosticsAccumulator::~DiagnosticsAccumulator() = default;

void DiagnosticsAccumulator::Add(const RowDiagnostic& row, double weight) {
  State& state = *state_;
  assert(!state.finished);
  DiagnosticsResult& result = state.result;
  if (result.rows == 0 || row.leverage > result.max_leverage) {
    result.max_leverage = row.leverage;
    result.max_leverage_line = row.line;
    result.max_leverage_file = row.file;
  }
  ++result.rows;
  result.weighted_residual_sum_of_squares += weight * row.residual * row.residual;
  if (row.leverage >= 1 - kLeverageOneTolerance) {
    state.press_defined = false;
    ++result.leverage_one_rows;
  } else {
    const double deleted = row.residual / (1 - row.leverage);
    state.press += weight * deleted * deleted;
  }
  const StandOutThresholds& thresholds = result.thresholds;
  result.cooks_above += thresholds.CooksAbove(row) ? 1 : 0;
  result.standardized_residual_above += thresholds.StandardizedResidualAbove(row) ? 1 : 0;
  result.leverage_above += thresholds.LeverageAbove(row) ? 1 : 0;
  result.stand_out += thresholds.StandsOut(row) ? 1 : 0;
  state.leverage.Add(row);
  state.cooks.Add(row);
  state.standardized.Add(row);

  if (row.standardized_residual && std::isfinite(*row.standardized_residual)) {
    const double value = *row.standardized_residual;
    result.largest_abs_standardized_residual = std::max(result.largest_abs_standardized_residual, std::abs(value));
    const double clamped = std::clamp(value, -kStandardizedHistogramLimit, kStandardizedHistogramLimit);
    const double position = (clamped + kStandardizedHistogramLimit) / (2 * kStandardizedHistogramLimit) *
                            static_cast<double>(kStandardizedHistogramBins);
    ++result.standardized_histogram[std::min(kStandardizedHistogramBins - 1,
                                             static_cast<std::size_t>(std::max(0.0, position)))];
    state.sketch(value);
    ++state.standardized_count;
    if (state.standardized_count <= kDiagnosticsExactQuantileRows) {
      state.kept_standardized.push_back(value);
    } else if (!state.kept_standardized.empty()) {
      std::vector<double>().swap(state.kept_standardized);
    }
  } else {
    ++result.standardized_residual_undefined;
  }
  result.fitted_residual_density.Add(row.fitted, row.residual);
  result.cooks_by_line.Add(row);
}

DiagnosticsResult DiagnosticsAccumulator::Finish() {
  State& state = *state_;
  assert(!state.finished);
  state.finished = true;
  DiagnosticsResult result = std::move(state.result);
  if (state.press_defined) result.press = state.press;
  result.largest_leverage = std::move(state.leverage).Sorted();
  result.largest_cooks_distance = std::move(state.cooks).Sorted();
  result.largest_standardized_residual = std::move(state.standardized).Sorted();
  if (state.standardized_count > 0) {
    const std::vector<double>& probabilities = NormalQuantileProbabilities();
    const boost::math::normal standard_normal;
    const bool exact = state.standardized_count <= kDiagnosticsExactQuantileRows;
    std::sort(state.kept_standardized.begin(), state.kept_standardized.end());
    const auto sketched = acc::extended_p_square(state.sketch);
    for (std::size_t i = 0; i < probabilities.size(); ++i) {
      NormalQuantile quantile;
      quantile.probability = probabilities[i];
      quantile.normal = boost::math::quantile(standard_normal, probabilities[i]);
      quantile.sample = exact ? ExactQuantile(state.kept_standardized, probabilities[i]) : sketched[i];
      result.normal_quantiles.push_back(quantile);
    }
  }
  return result;
}

// ---- the pass --------------------------------------------------------------------------------

RowDiagnoser::RowDiagnoser(const FitResult& fit) {
  const std::size_t k = fit.columns.size();
  if (fit.model_triangle.n_rows != k || fit.model_scales.size() != k + 1) {
    throw std::invalid_argument("ComputeDiagnostics: the fit carries no model factor (not made by FitModel)");
  }
  model_.columns = fit.columns;
  model_.k = k;
  model_.beta = fit.beta;
  model_.model_triangle = fit.model_triangle;
  model_.model_scales = fit.model_scales;
  model_.criteria.sigma = fit.criteria.sigma;
  model_x_.resize(k);
  scratch_.resize(k);
}

RowDiagnostic RowDiagnoser::Diagnose(const UsedRow& row) {
  const std::size_t k = model_.columns.size();
  const std::optional<double> sigma = model_.criteria.sigma;
  RowDiagnostic diagnostic;
  diagnostic.row_index = row.row_index;
  diagnostic.line = row.line;
  diagnostic.file = row.file;
  ModelValues(row);
  const FittedRow fitted = FitRow(model_, model_x_, row.y);
  diagnostic.fitted = fitted.fitted;
  diagnostic.residual = fitted.residual;
  diagnostic.leverage = row.weight * UnitLeverage(model_, model_x_, scratch_);
  if (diagnostic.leverage < 1 - kLeverageOneTolerance && sigma && *sigma > 0 && k > 0) {
    const double one_minus_h = 1 - diagnostic.leverage;
    const double standardized = std::sqrt(row.weight) * diagnostic.residual / (*sigma * std::sqrt(one_minus_h));
    diagnostic.standardized_residual = standardized;
    diagnostic.cooks_distance = standardized * standardized * diagnostic.leverage / (static_cast<double>(k) * one_minus_h);
  }
  return diagnostic;
}

std::span<const double> RowDiagnoser::ModelValues(const UsedRow& row) {
  for (std::size_t j = 0; j < model_.columns.size(); ++j) model_x_[j] = row.x[model_.columns[j]];
  return model_x_;
}

double RowDiagnoser::Prediction(const UsedRow& row) { return LinearPredictor(model_, ModelValues(row)); }

std::optional<double> RowDiagnoser::UnitLeverageOf(const UsedRow& row) {
  if (model_.model_triangle.is_empty()) return std::nullopt;
  return UnitLeverage(model_, ModelValues(row), scratch_);
}

std::string RowDiagnoser::Write() const {
  const std::size_t k = model_.columns.size();
  ByteWriter out;
  out.U64(k);
  for (std::size_t column : model_.columns) out.U64(column);
  out.Raw(model_.beta.memptr(), k * sizeof(double));
  out.Raw(model_.model_triangle.memptr(), k * k * sizeof(double));
  out.Raw(model_.model_scales.data(), (k + 1) * sizeof(double));
  out.U64(model_.criteria.sigma ? 1 : 0);
  out.F64(model_.criteria.sigma.value_or(0));
  return out.Take();
}

RowDiagnoser RowDiagnoser::Read(std::string_view bytes) {
  ByteReader in(bytes);
  RowDiagnoser diagnoser;
  FitResult& model = diagnoser.model_;
  const std::uint64_t k = in.U64();
  if (k > bytes.size()) throw std::logic_error("RowDiagnoser::Read: message shorter than its contents (a bug)");
  for (std::uint64_t j = 0; j < k; ++j) model.columns.push_back(static_cast<std::size_t>(in.U64()));
  model.k = model.columns.size();
  model.beta.set_size(k);
  in.Raw(model.beta.memptr(), k * sizeof(double));
  model.model_triangle.set_size(k, k);
  in.Raw(model.model_triangle.memptr(), k * k * sizeof(double));
  model.model_scales.resize(k + 1);
  in.Raw(model.model_scales.data(), (k + 1) * sizeof(double));
  const bool has_sigma = in.U64() != 0;
  const double sigma = in.F64();
  if (has_sigma) model.criteria.sigma = sigma;
  diagnoser.model_x_.resize(k);
  diagnoser.scratch_.resize(k);
  return diagnoser;
}

ColumnExtents::ColumnExtents(std::size_t columns)
    : low(columns, std::numeric_limits<double>::infinity()), high(columns, -std::numeric_limits<double>::infinity()) {}

void ColumnExtents::Widen(std::span<const std::size_t> columns, std::span<const double> x) {
  for (std::size_t i = 0; i < columns.size(); ++i) {
    const double value = x[columns[i]];
    low[i] = std::min(low[i], value);
    high[i] = std::max(high[i], value);
  }
}

void ColumnExtents::Widen(const ColumnExtents& other) {
  for (std::size_t i = 0; i < low.size(); ++i) {
    low[i] = std::min(low[i], other.low[i]);
    high[i] = std::max(high[i], other.high[i]);
  }
}

DiagnosingReplay DiagnoseHere(RowReplay replay) {
  return [replay = std::move(replay)](const RowDiagnoser& diagnoser, std::span<const std::size_t> extent_columns,
                                      const std::function<void(const RowDiagnostic&, double)>& visit) {
    RowDiagnoser diagnosing = diagnoser;
    ColumnExtents extents(extent_columns.size());
    replay([&](const UsedRow& row) {
      extents.Widen(extent_columns, row.x);
      visit(diagnosing.Diagnose(row), row.weight);
    });
    return extents;
  };
}

DiagnosticsResult ComputeDiagnostics(const FitResult& fit, const Design& design, const RowReplay& replay,
                                     const DiagnosticsOptions& options) {
  (void)design;
  return ComputeDiagnostics(fit, DiagnoseHere(replay), options);
}

DiagnosticsResult ComputeDiagnostics(const FitResult& fit, const DiagnosingReplay& rows,
                                     const DiagnosticsOptions& options) {
  const RowDiagnoser diagnoser(fit);
  DiagnosticsAccumulator accumulator(StandOutThresholds::CommonPractice(fit.n, fit.k), options.rows_by_record);
  rows(diagnoser, {}, [&](const RowDiagnostic& diagnostic, double weight) {
    accumulator.Add(diagnostic, weight);
    if (options.row_observer) options.row_observer(diagnostic);
  });
  return accumulator.Finish();
}

}  // namespace stepledger
