#include "validation_run.h"

#include <algorithm>
#include <array>
#include <cmath>
#include <numeric>
#include <span>
#include <vector>

#include <boost/accumulators/accumulators.hpp>
#include <boost/accumulators/statistics/extended_p_square.hpp>
#include <boost/accumulators/statistics/stats.hpp>

#include "stepledger/engine/share_exchange.h"

namespace stepledger::run_detail {

FoldValidation FinalModelFolds(const CrossValidation* cross_validation, const FoldFactorBuilder& build_folds,
                               const FitResult& fit, const FoldSettings& settings, const KernelOptions& kernel) {
  FoldValidation result;
  result.settings = settings;
  result.residual_sd = fit.criteria.sigma;
  std::optional<CrossValidation> own;
  std::vector<std::size_t> columns = fit.columns;
  if (cross_validation == nullptr) {
    own.emplace(build_folds(fit.columns), kernel);
    cross_validation = &*own;
    std::iota(columns.begin(), columns.end(), std::size_t{0});
  }
  const FoldErrors errors = cross_validation->Evaluate(columns);
  result.rmse = errors.rmse;
  result.undefined_reason = errors.undefined_reason;
  for (std::size_t f = 0; f < cross_validation->folds(); ++f) {
    FoldOutcome outcome;
    outcome.fold = f;
    outcome.rows = cross_validation->fold(f).rows;
    outcome.weight = cross_validation->fold(f).weight_sum;
    outcome.sse = f < errors.sse.size() ? errors.sse[f] : 0;
    result.per_fold.push_back(outcome);
  }
  return result;
}

namespace {

namespace acc = boost::accumulators;
using DecileSketch = acc::accumulator_set<double, acc::stats<acc::tag::extended_p_square>>;

constexpr std::size_t kDeciles = 10;
constexpr std::size_t kExactRows = 64;

}  // namespace

HeldOutEvaluator::HeldOutEvaluator(const Design& design, const FitResult& fit, const PredictionSupport& support)
    : model_(fit) {
  for (const TermRange& range : support.ranges) {
    const std::size_t term = design.FindTerm(range.term);
    if (term == kNoTerm) continue;
    ranges_.push_back(RangeCheck{design.terms[term].first_column, range.min, range.max});
  }
  if (support.max_unit_leverage && !fit.model_triangle.is_empty()) max_unit_leverage_ = support.max_unit_leverage;
}

HeldOutRow HeldOutEvaluator::Evaluate(const UsedRow& row) {
  HeldOutRow evaluated;
  evaluated.prediction = model_.Prediction(row);
  evaluated.y = row.y;
  evaluated.weight = row.weight;
  for (const RangeCheck& range : ranges_) {
    const double value = row.x[range.column];
    if (value < range.min || value > range.max) evaluated.outside_ranges = true;
  }
  if (max_unit_leverage_) {
    const std::optional<double> leverage = model_.UnitLeverageOf(row);
    evaluated.high_leverage = leverage && *leverage > *max_unit_leverage_;
  }
  return evaluated;
}

std::string HeldOutEvaluator::Write() const {
  ByteWriter out;
  out.Text(model_.Write());
  out.U64(ranges_.size());
  for (const RangeCheck& range : ranges_) {
    out.U64(range.column);
    out.F64(range.min);
    out.F64(range.max);
  }
  out.U64(max_unit_leverage_ ? 1 : 0);
  out.F64(max_unit_leverage_.value_or(0));
  return out.Take();
}

HeldOutEvaluator HeldOutEvaluator::Read(std::string_view bytes) {
  ByteReader in(bytes);
  HeldOutEvaluator evaluator(RowDiagnoser::Read(in.Text()));
  const std::uint64_t ranges = in.U64();
  for (std::uint64_t i = 0; i < ranges; ++i) {
    RangeCheck range;
    range.column = static_cast<std::size_t>(in.U64());
    range.min = in.F64();
    range.max = in.F64();
    evaluator.ranges_.push_back(range);
  }
  const bool known = in.U64() != 0;
  const double leverage = in.F64();
  if (known) evaluator.max_unit_leverage_ = leverage;
  return evaluator;
}

void WriteHeldOutRow(ByteWriter& out, const HeldOutRow& row) {
  out.F64(row.prediction);
  out.F64(row.y);
  out.F64(row.weight);
  out.U64((row.outside_ranges ? 1 : 0) | (row.high_leverage ? 2 : 0));
}

HeldOutRow ReadHeldOutRow(ByteReader& in) {
  HeldOutRow row;
  row.prediction = in.F64();
  row.y = in.F64();
  row.weight = in.F64();
  const std::uint64_t flags = in.U64();
  row.outside_ranges = (flags & 1) != 0;
  row.high_leverage = (flags & 2) != 0;
  return row;
}

HeldOutReplay EvaluateHere(RowReplay held_out) {
  return [held_out = std::move(held_out)](const HeldOutEvaluator& evaluator,
                                          const std::function<void(const HeldOutRow&)>& visit) {
    HeldOutEvaluator evaluating = evaluator;
    held_out([&](const UsedRow& row) { visit(evaluating.Evaluate(row)); });
  };
}

HoldoutValidation EvaluateHoldout(const HeldOutReplay& held_out, const HeldOutEvaluator& evaluator,
                                  const HoldoutSettings& holdout) {
  HoldoutValidation result;
  result.settings = holdout;
  // Pass 1: error sums (weighted; the mean and SS about it by West's weighted update) and the
  // deciles of the predictions.
  std::array<double, kDeciles - 1> probabilities{};
  for (std::size_t d = 0; d < probabilities.size(); ++d) probabilities[d] = static_cast<double>(d + 1) / kDeciles;
  DecileSketch sketch{acc::tag::extended_p_square::probabilities = probabilities};
  double sse = 0, error_sum = 0, weight = 0, mean = 0, about_mean = 0;
  // A few rows are too few for the P^2 sketch (it needs 2 * 9 + 3 values to place its markers):
  // the first kExactRows predictions are kept and their deciles taken exactly when no more come.
  std::vector<double> first_predictions;
  held_out(evaluator, [&](const HeldOutRow& row) {
    const double prediction = row.prediction;
    const double error = row.y - prediction;
    ++result.rows;
    weight += row.weight;
    sse += row.weight * error * error;
    error_sum += row.weight * error;
    const double delta = row.y - mean;
    mean += delta * (row.weight / weight);
    about_mean += row.weight * delta * (row.y - mean);
    sketch(prediction);
    if (first_predictions.size() < kExactRows) first_predictions.push_back(prediction);
    if (row.outside_ranges) ++result.rows_outside_ranges;
    if (row.high_leverage) ++result.rows_high_leverage;
  });
  result.weight = weight;
  if (result.rows == 0) return result;
  result.rmse = std::sqrt(sse / weight);
  result.mean_error = error_sum / weight;
  if (result.rows >= 2 && about_mean > 0) result.r2 = 1 - sse / about_mean;
  // Pass 2: the calibration bins by those deciles.
  std::array<double, kDeciles - 1> bounds{};
  if (result.rows <= kExactRows) {
    // The empirical quantile (the smallest value with at least that share of rows at or below it).
    std::sort(first_predictions.begin(), first_predictions.end());
    const double rows = static_cast<double>(first_predictions.size());
    for (std::size_t d = 0; d < bounds.size(); ++d) {
      const double rank = std::ceil(probabilities[d] * rows);
      bounds[d] = first_predictions[static_cast<std::size_t>(std::max(rank, 1.0)) - 1];
    }
  } else {
    for (std::size_t d = 0; d < bounds.size(); ++d) bounds[d] = acc::extended_p_square(sketch)[d];
  }
  std::array<double, kDeciles> bin_weight{}, bin_prediction{}, bin_observed{};
  std::array<std::uint64_t, kDeciles> bin_rows{};
  held_out(evaluator, [&](const HeldOutRow& row) {
    const std::size_t bin = static_cast<std::size_t>(
        std::lower_bound(bounds.begin(), bounds.end(), row.prediction) - bounds.begin());
    ++bin_rows[bin];
    bin_weight[bin] += row.weight;
    bin_prediction[bin] += row.weight * row.prediction;
    bin_observed[bin] += row.weight * row.y;
  });
  for (std::size_t bin = 0; bin < kDeciles; ++bin) {
    if (bin_rows[bin] == 0) continue;
    result.calibration.push_back(CalibrationBin{bin + 1, bin_rows[bin], bin_prediction[bin] / bin_weight[bin],
                                                bin_observed[bin] / bin_weight[bin]});
  }
  return result;
}

}  // namespace stepledger::run_detail
