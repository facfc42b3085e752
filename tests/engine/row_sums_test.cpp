// Sums over parts of the rows (engine/row_sums.h): the bytes processes exchange, the double-double
// addition of parts, and a refinement pass's sums split into parts against the same sums over the
// rows at once (an invented simulation whose rows the test holds).

#include <gtest/gtest.h>

#include <cmath>
#include <limits>
#include <stdexcept>

#include "stepledger/engine/errors.h"
#include "stepledger/engine/fit.h"
#include "stepledger/engine/row_sums.h"
#include "support/dense_design.h"

namespace stepledger {
namespace {

TEST(RowSums, BytesRoundTripExactly) {
  RowSums sums;
  sums.rows = 12345678901ull;
  sums.hi = {1.0, -0.0, std::numeric_limits<double>::denorm_min(), 0x1.fffffffffffffp+1023};
  sums.lo = {0x1p-60, 0.0, 0.0, -0x1p+960};
  const RowSums back = RowSums::Read(sums.Write());
  EXPECT_EQ(back.rows, sums.rows);
  ASSERT_EQ(back.hi.size(), 4u);
  for (std::size_t i = 0; i < 4; ++i) {
    EXPECT_EQ(std::signbit(back.hi[i]), std::signbit(sums.hi[i]));
    EXPECT_EQ(back.hi[i], sums.hi[i]);
    EXPECT_EQ(back.lo[i], sums.lo[i]);
  }
}

TEST(RowSums, AddKeepsWhatADoubleWouldLose) {
  // 1 + 2^-80 + (-1): a double sum gives 0, the double-double sum keeps 2^-80 (exact arithmetic).
  RowSums a{1, {1.0}, {0.0}}, b{2, {0x1p-80}, {0.0}}, c{3, {-1.0}, {0.0}};
  a.Add(b);
  a.Add(c);
  EXPECT_EQ(a.rows, 6u);
  EXPECT_EQ(a.hi[0] + a.lo[0], 0x1p-80);
}

TEST(RowSums, PartsOfDifferentRecipesAreRefused) {
  RowSums a{1, {1.0, 2.0}, {0.0, 0.0}}, b{1, {1.0}, {0.0}};
  EXPECT_THROW(a.Add(b), std::logic_error);
}

TEST(RowSums, AnUnknownRecipeIsRefused) {
  const std::string recipe(8, '\x7f');
  EXPECT_THROW(MakeRowSumKernel(recipe), std::invalid_argument);
  EXPECT_THROW(MakeRowSumKernel(""), std::logic_error);  // too short to hold a kind
}

// A fit refined through sums from parts (as processes of a shared run make them) against the fit
// refined over all rows at once: the same estimates, RSS and TSS to 1e-14 relative, whatever the
// cut points (an empty part, one row, uneven parts), with weights.
TEST(RowSums, RefinementFromPartsMatchesOnePart) {
  arma::arma_rng::set_seed(20261203);
  const std::size_t n = 301;
  arma::mat predictors = arma::randn(n, 3);
  predictors.col(0) = 1000 + predictors.col(0);  // far from the origin: the factor alone loses digits
  predictors.col(1) = arma::square(predictors.col(0)) + 0.01 * predictors.col(1);
  const arma::vec y = 5 + predictors * arma::vec{2, -0.001, 0.5} + 0.1 * arma::randn(n);
  const arma::vec w = 0.5 + arma::randu(n);
  const arma::mat x = arma::join_rows(arma::ones(n), predictors);
  const Design design = testing::MakeDenseDesign(true, {{"x1", 1}, {"x2", 1}, {"x3", 1}},
                                                 testing::PowerOfTwoScales(x, y));
  const Factor factor = testing::BuildFactor(x, y, w, 16, design.scales());
  const RowReplay all = testing::MemoryRowReplay(x, y, w);
  const FitResult whole = FitModel(factor, design, testing::AllTerms(design), FitOptions{}, &all);
  ASSERT_GT(whole.refinement_passes, 0);

  for (const std::vector<arma::uword>& cuts : std::vector<std::vector<arma::uword>>{
           {0, 0, n}, {0, 1, n}, {0, 100, 101, 250, n}, {0, n - 1, n}}) {
    int parts_summed = 0;
    const SummingReplay parted = testing::PartedSummingReplay(x, y, w, {}, cuts, &parts_summed);
    const FitResult fit = FitModel(factor, design, testing::AllTerms(design), FitOptions{}, parted);
    EXPECT_EQ(parts_summed, static_cast<int>(cuts.size() - 1) * fit.refinement_passes);
    EXPECT_EQ(fit.refinement_passes, whole.refinement_passes);
    for (std::size_t j = 0; j < fit.k; ++j) {
      EXPECT_NEAR(fit.beta(j), whole.beta(j), 1e-14 * std::abs(whole.beta(j))) << "coefficient " << j;
    }
    EXPECT_NEAR(fit.rss, whole.rss, 1e-14 * whole.rss);
    EXPECT_NEAR(fit.tss, whole.tss, 1e-14 * whole.tss);
  }
}

// The parts must cover the factor's rows: a replay that misses one is an error, not a fit.
TEST(RowSums, PartsThatMissARowAreRefused) {
  const arma::mat x = arma::join_rows(arma::ones(20), arma::regspace(1, 20));
  const arma::vec y = 3 + 2 * arma::regspace(1, 20) + arma::vec(20).fill(0.25) % arma::sin(arma::regspace(1, 20));
  const Design design = testing::MakeDenseDesign(true, {{"x1", 1}}, testing::PowerOfTwoScales(x, y));
  const Factor factor = testing::BuildFactor(x, y, {}, 16, design.scales());
  const SummingReplay short_by_one = [&](std::string_view recipe) {
    const std::unique_ptr<RowSumKernel> kernel = MakeRowSumKernel(recipe);
    testing::MemoryRowReplay(x.rows(0, 18), y.subvec(0, 18))([&](const UsedRow& row) { kernel->Add(row); });
    return kernel->Finish();
  };
  EXPECT_THROW(FitModel(factor, design, testing::AllTerms(design), FitOptions{}, short_by_one), NumericalError);
}

}  // namespace
}  // namespace stepledger
