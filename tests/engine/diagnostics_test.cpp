// The bounded diagnostics summary (engine/diagnostics.h) against a brute-force computation over
// every row: the largest-first lists, the counts, the binned views and the quantiles. Invented
// data only (simulations whose true model the test knows).

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <numeric>
#include <vector>

#include <armadillo>

#include "stepledger/engine/diagnostics.h"
#include "support/dense_design.h"
#include "support/row_diagnostics.h"
#include "support/test_random.h"

namespace stepledger {
namespace {

struct Problem {
  arma::mat x;  // intercept first
  arma::vec y, w;
  Design design;
  Factor factor;
  RowReplay replay;
  FitResult fit;
};

// n rows of a weighted design with two predictors; every third row repeats the row before it
// (same x, y and weight), so leverages, residuals and Cook's distances tie exactly.
Problem WeightedProblemWithTies(std::size_t n, std::uint64_t seed) {
  testing::TestRandom random(seed);
  Problem problem;
  problem.x.set_size(n, 3);
  problem.y.set_size(n);
  problem.w.set_size(n);
  for (std::size_t i = 0; i < n; ++i) {
    if (i % 3 == 2) {
      problem.x.row(i) = problem.x.row(i - 1);
      problem.y(i) = problem.y(i - 1);
      problem.w(i) = problem.w(i - 1);
      continue;
    }
    const double a = random.Uniform(0, 10), b = random.Normal();
    problem.x(i, 0) = 1;
    problem.x(i, 1) = a;
    problem.x(i, 2) = b * (i % 101 == 0 ? 6 : 1);  // a few rows of high leverage
    problem.w(i) = random.Uniform(0.5, 3);
    const double noise = random.Normal() * (i % 53 == 0 ? 5 : 1) / std::sqrt(problem.w(i));
    problem.y(i) = 4 + 0.7 * a - 2 * problem.x(i, 2) + noise;
  }
  problem.design = testing::MakeDenseDesign(true, {{"a", 1}, {"b", 1}}, testing::PowerOfTwoScales(problem.x, problem.y));
  problem.factor = testing::BuildFactor(problem.x, problem.y, problem.w, 64, problem.design.scales());
  problem.replay = testing::MemoryRowReplay(problem.x, problem.y, problem.w);
  problem.fit = FitModel(problem.factor, problem.design, testing::AllTerms(problem.design), FitOptions{},
                         &problem.replay);
  return problem;
}

std::vector<RowDiagnostic> BruteForceTop(std::vector<RowDiagnostic> rows,
                                         bool (*before)(const RowDiagnostic&, const RowDiagnostic&)) {
  std::sort(rows.begin(), rows.end(), before);
  rows.resize(std::min(rows.size(), kDiagnosticsTopRows));
  return rows;
}

TEST(Diagnostics, TopListsEqualABruteForceSortOfEveryRowTiesByRowIndex) {
  const Problem problem = WeightedProblemWithTies(3000, 41);
  DiagnosticsResult result;
  const std::vector<RowDiagnostic> rows =
      testing::DiagnoseEveryRow(problem.fit, problem.design, problem.replay, &result);
  ASSERT_EQ(rows.size(), 3000u);
  ASSERT_GT(rows.size(), kDiagnosticsTopRows);
  EXPECT_EQ(result.rows, 3000u);
  EXPECT_EQ(result.largest_leverage, BruteForceTop(rows, LargerLeverageFirst));
  EXPECT_EQ(result.largest_cooks_distance, BruteForceTop(rows, LargerCooksDistanceFirst));
  EXPECT_EQ(result.largest_standardized_residual, BruteForceTop(rows, LargerStandardizedResidualFirst));
  EXPECT_EQ(result.largest_leverage.size(), kDiagnosticsTopRows);
  // The ties are there and ordered by row index: a repeated row follows its twin.
  int ties = 0;
  for (const auto* list : {&result.largest_leverage, &result.largest_cooks_distance,
                           &result.largest_standardized_residual}) {
    for (std::size_t i = 1; i < list->size(); ++i) {
      const RowDiagnostic& a = (*list)[i - 1];
      const RowDiagnostic& b = (*list)[i];
      if (a.leverage == b.leverage && a.residual == b.residual) {
        ++ties;
        EXPECT_LT(a.row_index, b.row_index);
      }
    }
  }
  EXPECT_GT(ties, 10);

  // The counts, the largest leverage, PRESS.
  const StandOutThresholds thresholds = StandOutThresholds::CommonPractice(3000, 3);
  EXPECT_EQ(result.thresholds.cooks, thresholds.cooks);
  EXPECT_EQ(result.thresholds.leverage, thresholds.leverage);
  std::uint64_t cooks_above = 0, residual_above = 0, leverage_above = 0, stand_out = 0;
  double press = 0, max_leverage = 0;
  std::uint64_t max_line = 0;
  for (std::size_t i = 0; i < rows.size(); ++i) {
    const RowDiagnostic& row = rows[i];
    cooks_above += thresholds.CooksAbove(row);
    residual_above += thresholds.StandardizedResidualAbove(row);
    leverage_above += thresholds.LeverageAbove(row);
    stand_out += thresholds.StandsOut(row);
    press += problem.w(i) * std::pow(row.residual / (1 - row.leverage), 2);
    if (row.leverage > max_leverage) {
      max_leverage = row.leverage;
      max_line = row.line;
    }
  }
  EXPECT_EQ(result.cooks_above, cooks_above);
  EXPECT_EQ(result.standardized_residual_above, residual_above);
  EXPECT_EQ(result.leverage_above, leverage_above);
  EXPECT_EQ(result.stand_out, stand_out);
  EXPECT_GT(cooks_above, kDiagnosticsTopRows / 2);
  EXPECT_EQ(result.max_leverage, max_leverage);
  EXPECT_EQ(result.max_leverage_line, max_line);
  ASSERT_TRUE(result.press);
  EXPECT_NEAR(*result.press, press, 1e-9 * press);

  // The same rows in the same order give the same summary, bit for bit.
  const DiagnosticsResult again = ComputeDiagnostics(problem.fit, problem.design, problem.replay);
  EXPECT_EQ(again.largest_cooks_distance, result.largest_cooks_distance);
  EXPECT_EQ(again.fitted_residual_density.counts, result.fitted_residual_density.counts);
  EXPECT_EQ(again.standardized_histogram, result.standardized_histogram);
}

TEST(Diagnostics, HistogramAndDensityCountsSumToTheRowsUsed) {
  const Problem problem = WeightedProblemWithTies(4000, 42);
  DiagnosticsResult result;
  const std::vector<RowDiagnostic> rows =
      testing::DiagnoseEveryRow(problem.fit, problem.design, problem.replay, &result);
  const auto sum = [](const std::vector<std::uint64_t>& counts) {
    return std::accumulate(counts.begin(), counts.end(), std::uint64_t{0});
  };
  EXPECT_EQ(result.standardized_residual_undefined, 0u);
  EXPECT_EQ(sum(result.standardized_histogram), result.rows);
  EXPECT_EQ(result.fitted_residual_density.total, result.rows);
  EXPECT_EQ(sum(result.fitted_residual_density.counts), result.rows);
  // Every row lies inside the grown axes, and the largest |standardised residual| is tracked.
  const GrowingDensity& density = result.fitted_residual_density;
  double largest = 0;
  for (const RowDiagnostic& row : rows) {
    EXPECT_GE(row.fitted, density.x.lo);
    EXPECT_LT(row.fitted, density.x.hi());
    EXPECT_GE(row.residual, density.y.lo);
    EXPECT_LT(row.residual, density.y.hi());
    largest = std::max(largest, std::abs(*row.standardized_residual));
  }
  EXPECT_EQ(result.largest_abs_standardized_residual, largest);
  // The axes cover at most a few times the rows' range (growth doubles, it does not guess).
  const auto [fitted_low, fitted_high] = std::minmax_element(
      rows.begin(), rows.end(), [](const RowDiagnostic& a, const RowDiagnostic& b) { return a.fitted < b.fitted; });
  EXPECT_LT(density.x.hi() - density.x.lo, 4 * (fitted_high->fitted - fitted_low->fitted));
  // The largest Cook's distance is in its line range.
  double largest_cooks = 0;
  for (const auto& bin : result.cooks_by_line.largest) {
    if (bin) largest_cooks = std::max(largest_cooks, *bin->cooks_distance);
  }
  EXPECT_EQ(largest_cooks, *result.largest_cooks_distance.front().cooks_distance);
}

TEST(Diagnostics, GrowingDensityMergesBinsExactlyAsBinningOnTheFinalAxes) {
  // Integers from a first value of 0: every bin edge is an exact binary fraction, so binning all
  // values again on the final axes must give the merged counts exactly.
  testing::TestRandom random(7);
  std::vector<std::pair<double, double>> values{{0, 0}};
  for (int i = 0; i < 5000; ++i) {
    values.emplace_back(std::floor(random.Uniform(-300, 900)), std::floor(random.Normal() * 40));
  }
  GrowingDensity density(16, 8);
  for (const auto& [x, y] : values) density.Add(x, y);
  density.Add(std::nan(""), 1);  // not counted
  std::vector<std::uint64_t> recount(density.counts.size(), 0);
  for (const auto& [x, y] : values) ++recount[density.y.BinOf(y) * density.x.bins + density.x.BinOf(x)];
  EXPECT_EQ(density.counts, recount);
  EXPECT_EQ(density.total, values.size());
}

TEST(Diagnostics, QuantilesAreExactForSmallDataAndCloseForLargeData) {
  const std::vector<double>& probabilities = NormalQuantileProbabilities();
  for (const std::size_t n : {std::size_t{900}, std::size_t{60000}}) {
    testing::TestRandom random(n);
    DiagnosticsAccumulator accumulator(StandOutThresholds::CommonPractice(n, 2));
    std::vector<double> values;
    for (std::size_t i = 0; i < n; ++i) {
      RowDiagnostic row;
      row.row_index = i;
      row.line = i + 2;
      row.standardized_residual = random.Normal();
      row.residual = *row.standardized_residual;
      row.leverage = 2.0 / static_cast<double>(n);
      row.cooks_distance = 0;
      values.push_back(*row.standardized_residual);
      accumulator.Add(row);
    }
    const DiagnosticsResult result = accumulator.Finish();
    std::sort(values.begin(), values.end());
    ASSERT_EQ(result.normal_quantiles.size(), probabilities.size());
    for (std::size_t i = 0; i < probabilities.size(); ++i) {
      const NormalQuantile& quantile = result.normal_quantiles[i];
      // Hyndman-Fan type 7 by hand (common practice).
      const double h = (static_cast<double>(n) - 1) * probabilities[i];
      const auto below = static_cast<std::size_t>(std::floor(h));
      const double exact = values[below] + (h - static_cast<double>(below)) * (values[below + 1] - values[below]);
      EXPECT_EQ(quantile.probability, probabilities[i]);
      if (n <= kDiagnosticsExactQuantileRows) {
        EXPECT_DOUBLE_EQ(quantile.sample, exact) << probabilities[i];
      } else {
        // The streaming estimate: close in the body, looser in the far tails (a tolerance of
        // our own choosing for 60,000 normal draws).
        const double tolerance = probabilities[i] < 0.01 || probabilities[i] > 0.99 ? 0.15 : 0.05;
        EXPECT_NEAR(quantile.sample, exact, tolerance) << probabilities[i];
      }
    }
    // The normal quantiles (Boost.Math): Phi^-1(0.5) = 0; Phi^-1(0.999) = 3.090232 (standard
    // normal tables, handbook value).
    EXPECT_NEAR(result.normal_quantiles[16].normal, 0, 1e-15);
    EXPECT_NEAR(result.normal_quantiles.back().normal, 3.090232, 1e-6);
  }
}

TEST(Diagnostics, AnEmptyPassGivesAnEmptySummary) {
  DiagnosticsAccumulator accumulator(StandOutThresholds::CommonPractice(0, 1));
  const DiagnosticsResult result = accumulator.Finish();
  EXPECT_EQ(result.rows, 0u);
  EXPECT_TRUE(result.largest_leverage.empty());
  EXPECT_TRUE(result.normal_quantiles.empty());
  EXPECT_EQ(result.fitted_residual_density.total, 0u);
  ASSERT_TRUE(result.press);
  EXPECT_EQ(*result.press, 0);
}

}  // namespace
}  // namespace stepledger
