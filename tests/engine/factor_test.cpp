// The streaming factor: R'R equals X'WX of the scaled, weighted rows; any chunking and merge
// order gives the same R to rounding; running statistics merge like a single pass.

#include <gtest/gtest.h>

#include <cmath>
#include <limits>
#include <random>

#include "stepledger/engine/errors.h"
#include "stepledger/engine/factor.h"
#include "support/dense_design.h"

namespace stepledger {
namespace {

constexpr double kEps = std::numeric_limits<double>::epsilon();

struct Rows {
  arma::mat x;
  arma::vec y, w;
};

Rows RandomRows(std::size_t n, std::size_t m, unsigned seed) {
  arma::arma_rng::set_seed(seed);
  Rows rows;
  rows.x = arma::randn(n, m);
  rows.x.col(0).ones();
  rows.x.col(1) *= 1000.0;  // magnitudes apart, to exercise the scales
  rows.y = rows.x * arma::linspace(1, 2, m) + arma::randn(n);
  rows.w = 0.5 + arma::randu(n);
  return rows;
}

// Largest entry of |A - B| relative to the largest entry of |B|.
double RelativeDifference(const arma::mat& a, const arma::mat& b) {
  return arma::abs(a - b).max() / arma::abs(b).max();
}

Factor Fold(const Rows& rows, std::size_t first, std::size_t last, std::size_t block_rows,
            const std::vector<double>& scales) {
  FactorBuilder builder(scales, block_rows);
  std::vector<double> x(rows.x.n_cols);
  for (std::size_t i = first; i < last; ++i) {
    for (std::size_t j = 0; j < x.size(); ++j) x[j] = rows.x(i, j);
    builder.AddRow(x, rows.y(i), rows.w(i));
  }
  return builder.Finish();
}

TEST(Factor, GramOfRIsTheWeightedScaledGram) {
  const Rows rows = RandomRows(300, 5, 1);
  const std::vector<double> scales = testing::PowerOfTwoScales(rows.x, rows.y);
  const Factor factor = testing::BuildFactor(rows.x, rows.y, rows.w, 64, scales);
  arma::mat augmented = arma::join_rows(rows.x, rows.y);
  for (std::size_t j = 0; j < scales.size(); ++j) augmented.col(j) *= scales[j];
  augmented.each_col() %= arma::sqrt(rows.w);
  // Common practice: R'R = A'A for the QR of A; tolerance a few hundred ulps of the entries.
  EXPECT_LT(RelativeDifference(factor.r.t() * factor.r, augmented.t() * augmented), 500 * kEps);
  EXPECT_TRUE(factor.r.is_trimatu());
  for (arma::uword i = 0; i < factor.r.n_rows; ++i) EXPECT_GE(factor.r(i, i), 0.0);
  EXPECT_EQ(factor.rows, 300u);
  EXPECT_NEAR(factor.weight_sum, arma::accu(rows.w), 1e-12 * arma::accu(rows.w));
  EXPECT_NEAR(factor.log_weight_sum, arma::accu(arma::log(rows.w)), 1e-12 * 300);
  EXPECT_EQ(factor.column_count(), 5u);
  EXPECT_EQ(factor.scales, scales);
}

TEST(Factor, EveryBlockSizeGivesTheSameR) {
  const Rows rows = RandomRows(257, 6, 2);
  const std::vector<double> scales = testing::PowerOfTwoScales(rows.x, rows.y);
  const Factor reference = Fold(rows, 0, 257, 1, scales);
  for (std::size_t block_rows : {2u, 3u, 5u, 6u, 7u, 8u, 31u, 32u, 33u, 64u, 100u, 256u, 257u, 1000u}) {
    const Factor factor = Fold(rows, 0, 257, block_rows, scales);
    EXPECT_LT(RelativeDifference(factor.r, reference.r), 1e-12) << "block of " << block_rows << " rows";
  }
}

TEST(Factor, EveryMergeTreeGivesTheSameR) {
  const std::size_t n = 200;
  const Rows rows = RandomRows(n, 4, 3);
  const std::vector<double> scales = testing::PowerOfTwoScales(rows.x, rows.y);
  const Factor reference = Fold(rows, 0, n, 256, scales);
  std::mt19937 generator(7);
  for (int trial = 0; trial < 20; ++trial) {
    // Random cut points, random block sizes, then merge the pieces in a random pairing order.
    std::vector<std::size_t> cuts = {0, n};
    const int pieces = 2 + trial % 7;
    for (int p = 0; p < pieces - 1; ++p) cuts.push_back(generator() % n);
    std::sort(cuts.begin(), cuts.end());
    std::vector<Factor> factors;
    for (std::size_t c = 0; c + 1 < cuts.size(); ++c) {
      factors.push_back(Fold(rows, cuts[c], cuts[c + 1], 1 + generator() % 40, scales));
    }
    while (factors.size() > 1) {
      const std::size_t a = generator() % factors.size();
      Factor first = factors[a];
      factors.erase(factors.begin() + static_cast<std::ptrdiff_t>(a));
      const std::size_t b = generator() % factors.size();
      factors[b] = MergeFactors(first, factors[b]);
    }
    const Factor& merged = factors.front();
    EXPECT_LT(RelativeDifference(merged.r, reference.r), 1e-12) << "trial " << trial;
    EXPECT_EQ(merged.rows, n);
    EXPECT_NEAR(merged.weight_sum, reference.weight_sum, 1e-12 * reference.weight_sum);
    for (std::size_t j = 0; j < merged.column_stats.size(); ++j) {
      EXPECT_EQ(merged.column_stats[j].count, n);
      EXPECT_NEAR(merged.column_stats[j].mean, reference.column_stats[j].mean, 1e-12 * (1 + std::abs(reference.column_stats[j].mean)));
      EXPECT_NEAR(merged.column_stats[j].sd(), reference.column_stats[j].sd(), 1e-12 * reference.column_stats[j].sd() + 1e-300);
      EXPECT_EQ(merged.column_stats[j].min, reference.column_stats[j].min);
      EXPECT_EQ(merged.column_stats[j].max, reference.column_stats[j].max);
    }
  }
}

TEST(Factor, BuilderMergeFoldsPendingRowsOfBoth) {
  const std::size_t n = 90;
  const Rows rows = RandomRows(n, 3, 4);
  const std::vector<double> scales = testing::PowerOfTwoScales(rows.x, rows.y);
  const Factor reference = Fold(rows, 0, n, 256, scales);
  FactorBuilder left(scales, 16), right(scales, 7);
  std::vector<double> x(3);
  for (std::size_t i = 0; i < n; ++i) {
    for (std::size_t j = 0; j < 3; ++j) x[j] = rows.x(i, j);
    (i % 3 == 0 ? right : left).AddRow(x, rows.y(i), rows.w(i));
  }
  left.Merge(std::move(right));
  const Factor merged = left.Finish();
  EXPECT_LT(RelativeDifference(merged.r, reference.r), 1e-12);
  EXPECT_EQ(merged.rows, n);
}

TEST(Factor, RunningStatsMatchTwoPassFormulas) {
  const arma::vec values = {3.5, -1.25, 8.0, 2.0, 2.0, 1e6 + 0.5, 1e6 - 0.5};
  RunningStats whole, left, right;
  for (arma::uword i = 0; i < values.n_elem; ++i) {
    whole.Add(values(i));
    (i < 3 ? left : right).Add(values(i));
  }
  left.Merge(right);
  // Common practice: sample SD with n - 1 (two-pass formula as the reference).
  const double sd = arma::stddev(values);
  EXPECT_NEAR(whole.sd(), sd, 1e-12 * sd);
  EXPECT_NEAR(left.sd(), sd, 1e-12 * sd);
  EXPECT_NEAR(left.mean, arma::mean(values), 1e-12 * arma::mean(values));
  EXPECT_EQ(left.min, -1.25);
  EXPECT_EQ(left.max, 1e6 + 0.5);
  RunningStats empty;
  EXPECT_EQ(empty.sd(), 0.0);
  empty.Merge(whole);
  EXPECT_EQ(empty.count, whole.count);
}

TEST(Factor, RejectsBadScalesWeightsAndValues) {
  EXPECT_THROW(FactorBuilder({1.0, 3.0}), std::invalid_argument);  // 3 is not a power of two
  EXPECT_THROW(FactorBuilder({1.0, 1.0}, 0), std::invalid_argument);
  FactorBuilder builder({1.0, 0.5});
  const double x[] = {1.0};
  EXPECT_THROW(builder.AddRow(x, 1.0, 0.0), NumericalError);
  const double infinite[] = {std::numeric_limits<double>::infinity()};
  try {
    builder.AddRow(infinite, 1.0, 1.0);
    FAIL() << "expected NumericalError";
  } catch (const NumericalError& error) {
    EXPECT_NE(std::string(error.what()).find("design column 0"), std::string::npos) << error.what();
  }
  const double two[] = {1.0, 2.0};
  EXPECT_THROW(builder.AddRow(two, 1.0, 1.0), std::invalid_argument);
}

}  // namespace
}  // namespace stepledger
