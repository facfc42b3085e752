// The criterion layer: lower is better, adjusted R^2 negated, undefined cases with reasons.

#include "stepledger/selection/criterion.h"

#include <gtest/gtest.h>

#include <cmath>
#include <numbers>
#include <vector>

#include "stepledger/engine/cross_validation.h"
#include "stepledger/engine/errors.h"
#include "support/dense_design.h"
#include "support/selection_fixtures.h"

namespace stepledger {
namespace {

// Hald {x1, x2}: n = 13, k = 3, RSS 57.90448318, TSS 2715.763077 (reference README table).
CriterionContext HaldContext() {
  CriterionContext context;
  context.n = 13;
  context.tss = 2715.763077;
  context.full_sigma2 = 47.86363935 / (13 - 5);
  return context;
}

TEST(Criterion, ScoresFollowTheReadmeConventionAndLowerIsBetter) {
  const std::vector<std::size_t> columns{0, 1, 2};
  const ModelToScore model{columns, 57.90448318, 3};
  // By hand from DESIGN.md: -2 logL = n (ln 2 pi + ln(RSS/n) + 1).
  const double minus_two_log_l = 13 * (std::log(2 * std::numbers::pi) + std::log(57.90448318 / 13) + 1);
  EXPECT_NEAR(*MakeCriterion(Criterion::kAic, HaldContext())->ScoreModel(model).value, minus_two_log_l + 8, 1e-9);
  EXPECT_NEAR(*MakeCriterion(Criterion::kBic, HaldContext())->ScoreModel(model).value,
              minus_two_log_l + std::log(13.0) * 4, 1e-9);
  // Adjusted R^2 of {x1, x2}: 0.97441405 (reference README), negated inside.
  auto adj = MakeCriterion(Criterion::kAdjR2, HaldContext());
  const double inside = *adj->ScoreModel(model).value;
  EXPECT_NEAR(inside, -0.97441405, 1e-8);
  EXPECT_NEAR(adj->Reported(inside), 0.97441405, 1e-8);
  // Cp = RSS / sigma2_full - n + 2k = 2.678 (the fit command prints 2.6782416 for this model).
  EXPECT_NEAR(*MakeCriterion(Criterion::kCp, HaldContext())->ScoreModel(model).value, 2.6782416, 1e-6);
  // partial-f as a model score: the residual mean square.
  auto partial = MakeCriterion(Criterion::kPartialF, HaldContext());
  EXPECT_TRUE(partial->is_p_value_rule());
  EXPECT_NEAR(*partial->ScoreModel(model).value, 57.90448318 / 10, 1e-12);
}

TEST(Criterion, UndefinedCasesSayWhy) {
  const std::vector<std::size_t> columns{0, 1, 2, 3};
  CriterionContext context = HaldContext();
  context.n = 4;
  const Score saturated = MakeCriterion(Criterion::kAic, context)->ScoreModel({columns, 1e-20, 4});
  EXPECT_FALSE(saturated.defined());  // a formula would give a number; n <= k makes it undefined
  EXPECT_NE(saturated.undefined_reason.find("n <= k"), std::string::npos);
  const Score exact = MakeCriterion(Criterion::kBic, HaldContext())->ScoreModel({columns, 0, 4});
  EXPECT_FALSE(exact.defined());
  EXPECT_NE(exact.undefined_reason.find("exact fit"), std::string::npos);
  const Score aicc = MakeCriterion(Criterion::kAicc, HaldContext())->ScoreModel({columns, 10, 11});
  EXPECT_FALSE(aicc.defined());
  EXPECT_NE(aicc.undefined_reason.find("n - k - 2"), std::string::npos);
  context = HaldContext();
  context.full_sigma2.reset();
  EXPECT_FALSE(MakeCriterion(Criterion::kCp, context)->ScoreModel({columns, 10, 3}).defined());
}

TEST(Criterion, CvWithoutFoldFactorsIsRefusedNamingTheCriterion) {
  try {
    MakeCriterion(Criterion::kCv, HaldContext());
    FAIL();
  } catch (const PlanError& error) {
    EXPECT_EQ(error.key_path(), "criterion");
    EXPECT_NE(std::string(error.what()).find("per-fold factors"), std::string::npos);
  }
}

// Leave-one-out as 13 folds of one row each: the cv criterion's sum of squared held-out errors
// is then the PRESS statistic, sum_i (e_i / (1 - h_ii))^2 (Allen, "The relationship between
// variable selection and data augmentation and a method for prediction", Technometrics 16,
// 1974), computed here from the hat matrix of the full fit instead. Data: Hald cement {x1, x2}.
TEST(Criterion, CvOfOneRowFoldsIsThePressStatistic) {
  const testing::DenseProblem hald = testing::LoadHald();
  const std::size_t n = hald.x.n_rows;
  std::vector<Factor> folds;
  for (std::size_t i = 0; i < n; ++i) {
    folds.push_back(testing::BuildFactor(hald.x.rows(i, i), hald.y.rows(i, i), {}, 256, hald.design.scales()));
  }
  const CrossValidation cv(std::move(folds));
  CriterionContext context = HaldContext();
  context.cross_validation = &cv;
  const auto criterion = MakeCriterion(Criterion::kCv, context);
  EXPECT_EQ(criterion->ValueName(), "cv");
  const std::vector<std::size_t> columns{0, 1, 2};  // intercept, x1, x2
  const Score score = criterion->ScoreModel({columns, 57.90448318, 3});
  ASSERT_TRUE(score.defined()) << score.undefined_reason;
  ASSERT_EQ(score.fold_sse.size(), n);
  const arma::mat x = hald.x.cols(0, 2);
  const arma::mat hat = x * arma::inv_sympd(x.t() * x) * x.t();
  const arma::vec residual = hald.y - hat * hald.y;
  double press = 0;
  for (std::size_t i = 0; i < n; ++i) {
    const double loo = residual(i) / (1 - hat(i, i));
    press += loo * loo;
    EXPECT_NEAR(score.fold_sse[i], loo * loo, 1e-9 * loo * loo + 1e-12) << "row " << i;
  }
  EXPECT_NEAR(*score.value, std::sqrt(press / static_cast<double>(n)), 1e-10 * std::sqrt(press));
  EXPECT_EQ(criterion->Reported(*score.value), *score.value);  // lower is better, shown as is
}

TEST(Criterion, TiesAreRelative) {
  EXPECT_TRUE(ScoresTie(100.0, 100.0 * (1 + 5e-13)));
  EXPECT_FALSE(ScoresTie(100.0, 100.0 * (1 + 5e-12)));
  EXPECT_TRUE(ScoresTie(0.0, 0.0));
  EXPECT_FALSE(ScoresTie(0.0, 1e-300));
}

}  // namespace
}  // namespace stepledger
