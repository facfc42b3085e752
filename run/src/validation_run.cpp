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

// The model's values of a used row (fit.columns, model order), the input of LinearPredictor
// and UnitLeverage.
std::span<const double> ModelValues(const FitResult& fit, const UsedRow& row, std::vector<double>& model_x) {
  for (std::size_t j = 0; j < fit.columns.size(); ++j) model_x[j] = row.x[fit.columns[j]];
  return model_x;
}

struct RangeCheck {
  std::size_t column = 0;
  double min = 0, max = 0;
};

}  // namespace

HoldoutValidation EvaluateHoldout(const RowReplay& held_out, const Design& design, const FitResult& fit,
                                  const PredictionSupport& support, const HoldoutSettings& holdout) {
  HoldoutValidation result;
  result.settings = holdout;
  std::vector<RangeCheck> ranges;
  for (const TermRange& range : support.ranges) {
    const std::size_t term = design.FindTerm(range.term);
    if (term == kNoTerm) continue;
    ranges.push_back(RangeCheck{design.terms[term].first_column, range.min, range.max});
  }
  // Pass 1: error sums (weighted; the mean and SS about it by West's weighted update) and the
  // deciles of the predictions.
  std::array<double, kDeciles - 1> probabilities{};
  for (std::size_t d = 0; d < probabilities.size(); ++d) probabilities[d] = static_cast<double>(d + 1) / kDeciles;
  DecileSketch sketch{acc::tag::extended_p_square::probabilities = probabilities};
  double sse = 0, error_sum = 0, weight = 0, mean = 0, about_mean = 0;
  std::vector<double> model_x(fit.columns.size()), scratch(fit.columns.size());
  const bool leverage_known = support.max_unit_leverage.has_value() && !fit.model_triangle.is_empty();
  // A few rows are too few for the P^2 sketch (it needs 2 * 9 + 3 values to place its markers):
  // the first kExactRows predictions are kept and their deciles taken exactly when no more come.
  std::vector<double> first_predictions;
  held_out(
      [&](const UsedRow& row) {
        const std::span<const double> values = ModelValues(fit, row, model_x);
        const double prediction = LinearPredictor(fit, values);
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
        bool outside = false;
        for (const RangeCheck& range : ranges) {
          const double value = row.x[range.column];
          if (value < range.min || value > range.max) outside = true;
        }
        if (outside) ++result.rows_outside_ranges;
        if (leverage_known && UnitLeverage(fit, values, scratch) > *support.max_unit_leverage) {
          ++result.rows_high_leverage;
        }
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
  held_out(
      [&](const UsedRow& row) {
        const double prediction = LinearPredictor(fit, ModelValues(fit, row, model_x));
        const std::size_t bin = static_cast<std::size_t>(
            std::lower_bound(bounds.begin(), bounds.end(), prediction) - bounds.begin());
        ++bin_rows[bin];
        bin_weight[bin] += row.weight;
        bin_prediction[bin] += row.weight * prediction;
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
