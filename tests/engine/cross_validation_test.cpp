// k-fold cross-validation from per-fold factors (engine/cross_validation.h) against a
// brute-force refit from the rows, and the fold assignment (engine/resampling.h) against its
// formula.
//
// Sources: the fold formula is the one of engine/resampling.h (SplitMix64's finaliser, Steele,
// Lea and Flood, OOPSLA 2014); the reference hashes below are the first outputs of the
// SplitMix64 generator started from state 0 (from memory: 0xe220a8397b1dcdaf,
// 0x6e789e6aa1b965f4, 0x06c45d188009454f), confirmed, with the other values, by evaluating the
// formula with Python 3's arbitrary-precision integers (h = ((seed + (i + 1) * G) mod 2^64),
// then the three xor-shifts and two products mod 2^64). The brute-force reference is plain
// weighted least squares per training set (LAPACK through Armadillo) on invented data with no
// meaning beyond exercising the arithmetic.

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <numeric>
#include <stdexcept>

#include "stepledger/engine/cross_validation.h"
#include "stepledger/engine/resampling.h"
#include "support/dense_design.h"
#include "support/test_random.h"

namespace stepledger {
namespace {

using testing::BruteForceFoldSse;
using testing::BuildFoldFactors;
using testing::FoldsOfRows;
using testing::TestRandom;

// --- The fold assignment ---------------------------------------------------------------------

// The formula once more, with 128-bit products reduced mod 2^64 by hand, so that the header's
// wrap-around arithmetic is checked by an independent route. (__extension__: GCC and Clang
// have the 128-bit type; -Wpedantic would warn about it otherwise.)
__extension__ typedef unsigned __int128 Uint128;

std::uint64_t MulMod64(std::uint64_t a, std::uint64_t b) {
  const Uint128 product = static_cast<Uint128>(a) * b;
  return static_cast<std::uint64_t>(product & ~std::uint64_t{0});
}

std::uint64_t DirectHash(std::uint64_t seed, std::uint64_t record) {
  const Uint128 sum = static_cast<Uint128>(seed) + static_cast<Uint128>(MulMod64(record + 1, 0x9E3779B97F4A7C15ull));
  std::uint64_t z = static_cast<std::uint64_t>(sum & ~std::uint64_t{0});
  z ^= z >> 30;
  z = MulMod64(z, 0xBF58476D1CE4E5B9ull);
  z ^= z >> 27;
  z = MulMod64(z, 0x94D049BB133111EBull);
  z ^= z >> 31;
  return z;
}

TEST(FoldAssignment, KnownValues) {
  // SplitMix64 from state 0: its first three outputs (from memory; confirmed with Python ints).
  EXPECT_EQ(RecordHash(0, 0), 0xe220a8397b1dcdafull);
  EXPECT_EQ(RecordHash(0, 1), 0x6e789e6aa1b965f4ull);
  EXPECT_EQ(RecordHash(0, 2), 0x06c45d188009454full);
  // Further values computed with Python 3 integers (the formula of engine/resampling.h).
  EXPECT_EQ(RecordHash(1, 0), 0x910a2dec89025cc1ull);
  EXPECT_EQ(RecordHash(1, 999), 0xe71894b1b5034fb7ull);
  EXPECT_EQ(RecordHash(~std::uint64_t{0}, 0), 0xe4d971771b652c20ull);  // seed + gamma wraps
  EXPECT_EQ(RecordHash(12345, std::uint64_t{1} << 40), 0x62ec45759fccd821ull);
  EXPECT_EQ(RecordHash(7, ~std::uint64_t{0} - 1), 0xa371d08fdb2bd8bfull);  // (i + 1) * gamma wraps
  // Folds of the same records (Python 3: h % k).
  EXPECT_EQ(FoldOfRecord(0, 0, 10), 5u);
  EXPECT_EQ(FoldOfRecord(0, 1, 10), 0u);
  EXPECT_EQ(FoldOfRecord(0, 2, 10), 9u);
  EXPECT_EQ(FoldOfRecord(1, 0, 7), 2u);
  EXPECT_EQ(FoldOfRecord(1, 999, 100), 11u);
  EXPECT_EQ(FoldOfRecord(~std::uint64_t{0}, 0, 7), 0u);
  EXPECT_EQ(FoldOfRecord(12345, std::uint64_t{1} << 40, 10), 7u);
  EXPECT_EQ(FoldOfRecord(7, ~std::uint64_t{0} - 1, 100), 71u);
  // constexpr: the assignment can be checked at compile time.
  static_assert(FoldOfRecord(0, 0, 10) == 5);
}

TEST(FoldAssignment, EqualsADirectEvaluationOfTheFormula) {
  TestRandom random(20261202);
  for (int trial = 0; trial < 2000; ++trial) {
    const auto seed = static_cast<std::uint64_t>(random.Uniform(0, 1) * 0x1.0p64);
    const auto record = trial < 1000 ? static_cast<std::uint64_t>(trial)
                                     : static_cast<std::uint64_t>(random.Uniform(0, 1) * 0x1.0p64);
    const std::size_t folds = kMinFolds + static_cast<std::size_t>(trial) % (kMaxFolds - kMinFolds + 1);
    ASSERT_EQ(RecordHash(seed, record), DirectHash(seed, record)) << "seed " << seed << " record " << record;
    ASSERT_EQ(FoldOfRecord(seed, record, folds), DirectHash(seed, record) % folds);
  }
}

TEST(FoldAssignment, SpreadsRecordsEvenly) {
  // Common practice: a good mixer fills 10 folds of 100,000 records within a few standard
  // deviations (sqrt(100000 * 0.1 * 0.9) = 95) of 10,000 each.
  std::vector<std::size_t> counts(10, 0);
  for (std::uint64_t record = 0; record < 100000; ++record) ++counts[FoldOfRecord(1, record, 10)];
  for (std::size_t count : counts) EXPECT_NEAR(static_cast<double>(count), 10000.0, 500.0);
}

// --- Fold-factor cross-validation against a refit from the rows --------------------------------

struct Rows {
  arma::mat x;   // intercept, numeric columns, dummies, products
  arma::vec y, w;
};

// Invented rows: an intercept, three numeric columns of different magnitudes (the scales then
// differ), a categorical of four levels as three dummies (baseline level 0), and two products
// (numeric 1 times each of the first two dummies).
Rows MakeRows(std::uint64_t seed, std::size_t n, bool weighted) {
  TestRandom random(seed);
  Rows rows;
  rows.x.set_size(n, 9);
  rows.y.set_size(n);
  rows.w = weighted ? arma::vec(n) : arma::vec();
  for (std::size_t i = 0; i < n; ++i) {
    const double a = random.Normal() * 1000.0 + 5000.0;
    const double b = random.Normal() * 0.01;
    const double c = random.Uniform(-3, 3);
    const int level = std::min(3, static_cast<int>(random.Uniform(0, 4)));
    rows.x(i, 0) = 1;
    rows.x(i, 1) = a;
    rows.x(i, 2) = b;
    rows.x(i, 3) = c;
    for (int d = 1; d <= 3; ++d) rows.x(i, 3 + d) = level == d ? 1.0 : 0.0;
    rows.x(i, 7) = a * rows.x(i, 4);
    rows.x(i, 8) = a * rows.x(i, 5);
    rows.y(i) = 200 + 0.05 * a + 3000 * b - 40 * c + 90 * rows.x(i, 4) - 0.01 * rows.x(i, 7) +
                25 * random.Normal();
    if (weighted) rows.w(i) = 0.25 + 2 * random.Uniform(0, 1);
  }
  return rows;
}

double Relative(double actual, double expected) {
  return std::fabs(actual - expected) / std::max(std::fabs(expected), 1e-300);
}

void ExpectMatchesRefit(const CrossValidation& cv, const Rows& rows, const std::vector<std::size_t>& fold_of_row,
                        const std::vector<std::size_t>& columns, const std::string& label) {
  const auto expected = BruteForceFoldSse(rows.x, rows.y, rows.w, fold_of_row, cv.folds(), columns);
  ASSERT_TRUE(expected.has_value()) << label;
  const FoldErrors errors = cv.Evaluate(columns);
  ASSERT_TRUE(errors.rmse.has_value()) << label << ": " << errors.undefined_reason;
  ASSERT_EQ(errors.sse.size(), cv.folds()) << label;
  double total = 0;
  for (std::size_t f = 0; f < cv.folds(); ++f) {
    EXPECT_LE(Relative(errors.sse[f], (*expected)[f]), 1e-9)
        << label << " fold " << f << ": " << errors.sse[f] << " vs refit " << (*expected)[f];
    total += (*expected)[f];
  }
  const double weight = rows.w.is_empty() ? static_cast<double>(rows.x.n_rows) : arma::accu(rows.w);
  EXPECT_LE(Relative(*errors.rmse, std::sqrt(total / weight)), 1e-9) << label;
}

class FoldFactorCv : public ::testing::TestWithParam<bool> {};

TEST_P(FoldFactorCv, EqualsABruteForceRefitForRandomSubsets) {
  const bool weighted = GetParam();
  for (std::uint64_t data_seed = 1; data_seed <= 4; ++data_seed) {
    const Rows rows = MakeRows(data_seed, 400, weighted);
    const std::size_t folds = data_seed == 1 ? 2 : 3 + 2 * data_seed;  // 2, 7, 9, 11
    const auto fold_of_row = FoldsOfRows(rows.x.n_rows, 1000 + data_seed, folds);
    const CrossValidation cv(BuildFoldFactors(rows.x, rows.y, rows.w, fold_of_row, folds));
    ASSERT_EQ(cv.rows(), rows.x.n_rows);
    TestRandom random(77 + data_seed);
    for (int subset = 0; subset < 25; ++subset) {
      // A random subset of the 9 columns in a random order (the kernel's model order is not
      // plan order); products only with their dummy, as hierarchy would have them.
      std::vector<std::size_t> columns;
      for (std::size_t column = 0; column < 9; ++column) {
        if (random.Uniform(0, 1) < 0.5) columns.push_back(column);
      }
      std::erase_if(columns, [&](std::size_t column) {
        return (column == 7 || column == 8) &&
               std::find(columns.begin(), columns.end(), column - 3) == columns.end();
      });
      for (std::size_t j = columns.size(); j > 1; --j) {
        std::swap(columns[j - 1], columns[static_cast<std::size_t>(random.Uniform(0, static_cast<double>(j)))]);
      }
      ExpectMatchesRefit(cv, rows, fold_of_row, columns,
                         "data " + std::to_string(data_seed) + " subset " + std::to_string(subset));
    }
    ExpectMatchesRefit(cv, rows, fold_of_row, {0, 1, 2, 3, 4, 5, 6, 7, 8}, "all columns");
    ExpectMatchesRefit(cv, rows, fold_of_row, {}, "no columns");
  }
}

INSTANTIATE_TEST_SUITE_P(WeightedAndUnweighted, FoldFactorCv, ::testing::Bool());

TEST(FoldFactorCv, TrainingFactorIsTheMergeOfTheOtherFolds) {
  const Rows rows = MakeRows(9, 120, true);
  const auto fold_of_row = FoldsOfRows(rows.x.n_rows, 3, 5);
  const auto factors = BuildFoldFactors(rows.x, rows.y, rows.w, fold_of_row, 5);
  const CrossValidation cv(factors);
  for (std::size_t f = 0; f < 5; ++f) {
    std::uint64_t rows_out = 0;
    for (std::size_t other = 0; other < 5; ++other) rows_out += other == f ? 0 : factors[other].rows;
    EXPECT_EQ(cv.training(f).rows, rows_out);
    // R'R of the training factor equals the sum of the other folds' R'R.
    arma::mat gram(factors[0].r.n_cols, factors[0].r.n_cols, arma::fill::zeros);
    for (std::size_t other = 0; other < 5; ++other) {
      if (other != f) gram += factors[other].r.t() * factors[other].r;
    }
    const arma::mat actual = cv.training(f).r.t() * cv.training(f).r;
    EXPECT_LE(arma::abs(actual - gram).max() / arma::abs(gram).max(), 1e-12) << "fold " << f;
  }
}

TEST(FoldFactorCv, EmptyFoldsContributeNothing) {
  // 6 rows in 40 folds: most folds are empty; their sse is 0 and the rest still match.
  const Rows rows = MakeRows(5, 6, false);
  const auto fold_of_row = FoldsOfRows(rows.x.n_rows, 1, 40);
  const CrossValidation cv(BuildFoldFactors(rows.x, rows.y, rows.w, fold_of_row, 40));
  const std::vector<std::size_t> columns{0, 3};
  ExpectMatchesRefit(cv, rows, fold_of_row, columns, "sparse folds");
  const FoldErrors errors = cv.Evaluate(columns);
  for (std::size_t f = 0; f < 40; ++f) {
    if (std::find(fold_of_row.begin(), fold_of_row.end(), f) == fold_of_row.end()) {
      EXPECT_EQ(errors.sse[f], 0.0) << "empty fold " << f;
    }
  }
}

TEST(FoldFactorCv, AColumnAliasedWithoutOneFoldMakesTheErrorUndefined) {
  Rows rows = MakeRows(6, 200, false);
  const auto fold_of_row = FoldsOfRows(rows.x.n_rows, 11, 4);
  // Column 6 (the third dummy) becomes nonzero only in fold 2's rows: the training rows of
  // fold 2 see an all-zero column.
  for (arma::uword i = 0; i < rows.x.n_rows; ++i) rows.x(i, 6) = fold_of_row[i] == 2 ? (i % 2 ? 1.0 : 0.0) : 0.0;
  const CrossValidation cv(BuildFoldFactors(rows.x, rows.y, rows.w, fold_of_row, 4));
  const FoldErrors errors = cv.Evaluate(std::vector<std::size_t>{0, 1, 6});
  EXPECT_FALSE(errors.rmse.has_value());
  EXPECT_TRUE(errors.sse.empty());
  ASSERT_TRUE(errors.aliased_column.has_value());
  EXPECT_EQ(*errors.aliased_column, 6u);
  EXPECT_EQ(errors.aliased_fold, 2u);
  EXPECT_EQ(errors.aliased_relative_norm, 0.0);
  EXPECT_NE(errors.undefined_reason.find("fold 2"), std::string::npos) << errors.undefined_reason;
  // Without the column the model is fine.
  ExpectMatchesRefit(cv, rows, fold_of_row, {0, 1}, "without the aliased column");

  // An exact linear dependence (column 2 := 2 * column 3 - intercept) is aliased in every
  // training set: the first fold is named, and the column that comes later in the model.
  Rows dependent = MakeRows(7, 200, true);
  dependent.x.col(2) = 2 * dependent.x.col(3) - dependent.x.col(0);
  const CrossValidation cv2(BuildFoldFactors(dependent.x, dependent.y, dependent.w, fold_of_row, 4));
  const FoldErrors dependent_errors = cv2.Evaluate(std::vector<std::size_t>{0, 3, 2});
  EXPECT_FALSE(dependent_errors.rmse.has_value());
  ASSERT_TRUE(dependent_errors.aliased_column.has_value());
  EXPECT_EQ(*dependent_errors.aliased_column, 2u);
  EXPECT_EQ(dependent_errors.aliased_fold, 0u);
  EXPECT_LT(dependent_errors.aliased_relative_norm, 1e-10);
}

TEST(FoldFactorCv, RefusesMisuse) {
  const Rows rows = MakeRows(8, 50, false);
  const auto fold_of_row = FoldsOfRows(rows.x.n_rows, 1, 3);
  auto factors = BuildFoldFactors(rows.x, rows.y, rows.w, fold_of_row, 3);
  EXPECT_THROW(CrossValidation({factors[0]}), std::invalid_argument);
  auto other = factors;
  other[1].scales[0] *= 2;
  EXPECT_THROW(CrossValidation{other}, std::invalid_argument);
  const CrossValidation cv(factors);
  EXPECT_THROW(cv.Evaluate(std::vector<std::size_t>{9}), std::logic_error);
  EXPECT_THROW(cv.Evaluate(std::vector<std::size_t>{1, 1}), std::logic_error);
}

}  // namespace
}  // namespace stepledger
