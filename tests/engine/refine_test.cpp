// Refinement of the final fit against the rows (engine/src/refine.cpp, rule at the top of
// engine/fit.h): when it stops and why, what it records, and that stopping early loses nothing.
// Random designs are simulations whose true model the test knows; NIST StRD data sets are
// named beside each check.

#include <gtest/gtest.h>

#include <cmath>
#include <string>

#include "stepledger/engine/fit.h"
#include "support/dense_design.h"
#include "support/nist.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

struct Problem {
  arma::mat x, x_low;
  arma::vec y, w;
  Design design;
  Factor factor;
  RowReplay replay;
};

Problem MakeProblem(const arma::mat& x, const arma::vec& y, const arma::vec& w = {}, const arma::mat& x_low = {}) {
  Problem problem;
  problem.x = x;
  problem.x_low = x_low;
  problem.y = y;
  problem.w = w;
  std::vector<std::pair<std::string, std::size_t>> terms;
  for (arma::uword j = 1; j < x.n_cols; ++j) terms.push_back({"x" + std::to_string(j), 1});
  problem.design = testing::MakeDenseDesign(true, terms, testing::PowerOfTwoScales(x, y));
  problem.factor = testing::BuildFactor(x, y, w, 64, problem.design.scales());
  problem.replay = testing::MemoryRowReplay(x, y, w, x_low);
  return problem;
}

FitResult Fit(const Problem& problem, const FitOptions& options = {}, bool refine = true) {
  return FitModel(problem.factor, problem.design, testing::AllTerms(problem.design), options,
                  refine ? &problem.replay : nullptr);
}

// Intercept plus m standard normal predictors, y = 1 + x'beta + noise (true model known).
Problem WellConditioned(std::size_t n, std::size_t m, unsigned seed, bool weighted) {
  arma::arma_rng::set_seed(seed);
  arma::mat x = arma::join_rows(arma::ones(n), arma::randn(n, m));
  const arma::vec beta = arma::linspace(-1, 1, m + 1);
  const arma::vec y = x * beta + 0.3 * arma::randn(n);
  const arma::vec w = weighted ? arma::vec(0.5 + arma::randu(n)) : arma::vec();
  return MakeProblem(x, y, w);
}

// NIST StRD polynomial data sets as the design expansion builds them: powers in long double,
// passed on as the rounded double plus its low-order part.
Problem NistPolynomial(const std::string& name) {
  const testing::NistDataset data = testing::ReadNistDataset(testing::NistDirectory() / (name + ".dat"));
  const std::size_t degree = data.certified.estimates.size() - 1;
  const std::size_t n = data.y.n_elem;
  arma::mat x(n, degree + 1), x_low(n, degree + 1, arma::fill::zeros);
  x.col(0).ones();
  for (std::size_t power = 1; power <= degree; ++power) {
    for (std::size_t i = 0; i < n; ++i) {
      long double product = 1;
      for (std::size_t p = 0; p < power; ++p) product *= static_cast<long double>(data.predictors(i, 0));
      x(i, power) = static_cast<double>(product);
      x_low(i, power) = static_cast<double>(product - static_cast<long double>(x(i, power)));
    }
  }
  return MakeProblem(x, data.y, {}, x_low);
}

TEST(Refine, WellConditionedDesignStopsAfterOnePass) {
  for (const bool weighted : {false, true}) {
    for (const std::size_t n : {50u, 2000u, 20000u}) {
      const Problem problem = WellConditioned(n, 12, 31 + static_cast<unsigned>(n), weighted);
      const FitResult fit = Fit(problem);
      const std::string context = std::to_string(n) + " rows" + (weighted ? ", weighted" : "");
      EXPECT_EQ(fit.refinement_passes, 1) << context;
      EXPECT_EQ(fit.refinement_stop, RefinementStop::kConverged) << context;
      // Nothing was lost by stopping: with a tolerance no estimate can meet, passes go on until
      // a correction is zero or grows, and the estimates agree to the last bits (common practice).
      FitOptions strict;
      strict.refinement_tolerance = 1e-300;
      const FitResult more = Fit(problem, strict);
      EXPECT_GT(more.refinement_passes, 1) << context;
      for (std::size_t j = 0; j < fit.k; ++j) {
        EXPECT_NEAR(fit.beta(j), more.beta(j), 4e-16 * std::abs(more.beta(j)) + 1e-300) << context << ", coefficient " << j;
        EXPECT_NEAR(*fit.coefficients[j].se, *more.coefficients[j].se, 1e-15 * *more.coefficients[j].se) << context;
      }
      EXPECT_NEAR(fit.rss, more.rss, 1e-15 * more.rss) << context;
    }
  }
}

TEST(Refine, TheStopReasonIsRecorded) {
  const Problem problem = WellConditioned(200, 3, 41, false);
  const FitResult factor_only = Fit(problem, {}, /*refine=*/false);
  EXPECT_EQ(factor_only.refinement_passes, 0);
  EXPECT_EQ(factor_only.refinement_stop, RefinementStop::kNotRefined);
  FitOptions none;
  none.max_refinement_passes = 0;
  EXPECT_EQ(Fit(problem, none).refinement_stop, RefinementStop::kNotRefined);
  EXPECT_EQ(Fit(problem).refinement_stop, RefinementStop::kConverged);

  // NIST StRD Filip (degree-10 polynomial): one pass is not enough to converge.
  const Problem filip = NistPolynomial("Filip");
  FitOptions one_pass;
  one_pass.max_refinement_passes = 1;
  const FitResult limited = Fit(filip, one_pass);
  EXPECT_EQ(limited.refinement_passes, 1);
  EXPECT_EQ(limited.refinement_stop, RefinementStop::kPassLimit);
  // Asking for more than its rounding floor allows: the passes stop when a correction grows.
  FitOptions strict;
  strict.refinement_tolerance = 1e-300;
  const FitResult floor = Fit(filip, strict);
  EXPECT_EQ(floor.refinement_stop, RefinementStop::kNotShrinking);
  EXPECT_GT(floor.refinement_passes, 2);

  for (RefinementStop stop : {RefinementStop::kNotRefined, RefinementStop::kConverged,
                              RefinementStop::kNotShrinking, RefinementStop::kPassLimit}) {
    EXPECT_EQ(RefinementStopFromString(ToString(stop)), stop);
  }
  EXPECT_FALSE(RefinementStopFromString("done"));
  EXPECT_NE(Fit(problem).FullReport().find("stopped: converged"), std::string::npos);
}

TEST(Refine, IllConditionedPolynomialsRefineAsFarAsNeeded) {
  // NIST StRD Filip: the factor's solution has about 7 digits; two passes reach the long double
  // design's solution (11 digits against the certified values, the 2nd correction near 2e-14).
  const FitResult filip = Fit(NistPolynomial("Filip"));
  EXPECT_GT(filip.refinement_passes, 1);
  EXPECT_EQ(filip.refinement_stop, RefinementStop::kConverged);
  // NIST StRD Wampler5 (degree 5, large residuals): the first pass corrects the factor's
  // solution in the 7th digit; the second would correct nothing (exactly 0 with a strict
  // tolerance), which the estimate k u / rcond = 3e-12 of the contraction foresees.
  const Problem wampler5 = NistPolynomial("Wampler5");
  const FitResult one = Fit(wampler5);
  EXPECT_GT(one.refinement_correction, 1e-9) << "the first pass did correct the factor's solution";
  FitOptions strict;
  strict.refinement_tolerance = 1e-300;
  const FitResult more = Fit(wampler5, strict);
  EXPECT_GT(more.refinement_passes, one.refinement_passes);
  for (std::size_t j = 0; j < one.k; ++j) EXPECT_EQ(one.beta(j), more.beta(j)) << "coefficient " << j;
}

TEST(Refine, TheFactorsInverseIsKeptOnlyWhenTrusted) {
  // Well-conditioned: k u / rcond is far below the limit, no Gram pass, the inverse is the
  // factor's (symmetrised). NIST StRD Wampler1: 6 u / rcond = 3e-12 is above it, the inverse
  // is refined against the Gram matrix.
  const Problem problem = WellConditioned(500, 4, 43, false);
  const FitResult refined = Fit(problem), factor_only = Fit(problem, {}, false);
  ASSERT_LE(static_cast<double>(refined.k) * 0x1p-53 / refined.rcond, kInverseFromFactorLimit);
  EXPECT_LT(arma::abs(refined.xtwx_inverse - factor_only.xtwx_inverse).max(),
            1e-15 * arma::abs(factor_only.xtwx_inverse).max());
  const Problem wampler = NistPolynomial("Wampler1");
  const FitResult w_refined = Fit(wampler), w_factor = Fit(wampler, {}, false);
  ASSERT_GT(static_cast<double>(w_refined.k) * 0x1p-53 / w_refined.rcond, kInverseFromFactorLimit);
  EXPECT_FALSE(arma::approx_equal(w_refined.xtwx_inverse, w_factor.xtwx_inverse, "reldiff", 1e-16));
}

TEST(Refine, PartialBlocksAreCountedExactly) {
  // The kernel takes rows in blocks of 64 and pads the last one with rows of weight 0: row
  // counts around the block size give the RSS of a direct computation (common practice).
  for (const std::size_t n : {63u, 64u, 65u, 130u}) {
    const Problem problem = WellConditioned(n, 3, 47, true);
    const FitResult fit = Fit(problem);
    const arma::vec residual = problem.y - problem.x * fit.beta;
    const double rss = arma::dot(problem.w % residual, residual);
    EXPECT_NEAR(fit.rss, rss, 1e-12 * rss) << n << " rows";
    EXPECT_EQ(fit.refinement_stop, RefinementStop::kConverged);
  }
}

}  // namespace
}  // namespace stepledger
