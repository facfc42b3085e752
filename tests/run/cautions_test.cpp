// The validation cautions (run/cautions.h): with a bootstrap, every final-model term chosen in
// fewer than 60% of replicates (the validation issue's threshold) and every substitute pair is
// named; with a holdout, an RMSE more than 25% above the in-sample residual SD (common practice)
// is named. Each fires at its threshold and not just below it. Invented data whose true model
// the test knows: price = 100 - 2 age + 15 [grade = A] + noise; validation numbers are set by
// hand (support/validation_fixture.h): these tests are about the thresholds, not the computation.
#include "stepledger/run/cautions.h"

#include <sstream>
#include <string>

#include <gtest/gtest.h>

#include "stepledger/engine/number_format.h"
#include "support/test_paths.h"
#include "support/test_random.h"
#include "support/validation_fixture.h"

namespace stepledger {
namespace {

class ValidationCautions : public ::testing::Test {
 protected:
  static void SetUpTestSuite() {
    folder_ = new testing::TempDir();
    testing::TestRandom random(20261203);
    std::ostringstream csv;
    csv << "price,age,grade,noise\n";
    for (int row = 0; row < 200; ++row) {
      const double age = 1 + row % 40;
      const bool a = row % 3 == 0;
      csv << 100 - 2 * age + (a ? 15 : 0) + 0.5 * random.Normal() << "," << age << "," << (a ? "A" : "B") << ","
          << random.Normal() << "\n";
    }
    const auto data = folder_->Write("listings.csv", csv.str());
    run_ = new RunResult(RunPlan(data, ParsePlanText(R"({"response": "price", "terms": [
        {"name": "age", "column": "age"}, {"name": "grade", "categorical": "grade"},
        {"name": "noise", "column": "noise"}], "method": "stepwise", "criterion": "bic"})"),
                                 RunOptions{}));
  }
  static void TearDownTestSuite() {
    delete run_;
    delete folder_;
  }
  static const Caution* Find(const std::vector<Caution>& cautions, CautionKind kind) {
    for (const Caution& caution : cautions) {
      if (caution.kind == kind) return &caution;
    }
    return nullptr;
  }
  static testing::TempDir* folder_;
  static RunResult* run_;
};
testing::TempDir* ValidationCautions::folder_ = nullptr;
RunResult* ValidationCautions::run_ = nullptr;

TEST_F(ValidationCautions, NoValidationPartNoValidationCaution) {
  ASSERT_EQ(run_->fit.terms, (std::vector<std::string>{"age", "grade"})) << "the true model is chosen";
  const std::vector<Caution> cautions = ComputeCautions(*run_);
  EXPECT_EQ(Find(cautions, CautionKind::kSelectionStability), nullptr);
  EXPECT_EQ(Find(cautions, CautionKind::kHoldoutError), nullptr);
}

TEST_F(ValidationCautions, AFinalTermBelowSixtyPercentIsNamed) {
  RunResult run = *run_;
  run.validation = testing::FilledValidation(run, "grade", 0.595);
  run.validation.bootstrap->substitutes.clear();
  const std::vector<Caution> cautions = ComputeCautions(run);
  const Caution* caution = Find(cautions, CautionKind::kSelectionStability);
  ASSERT_NE(caution, nullptr);
  ASSERT_EQ(caution->rarely_chosen.size(), 1u);
  EXPECT_EQ(caution->rarely_chosen[0].term, "grade");
  EXPECT_NE(caution->message.find("grade (59.5%)"), std::string::npos) << caution->message;
  EXPECT_NE(caution->message.find("fewer than 60.0%"), std::string::npos) << caution->message;
  EXPECT_EQ(caution->message.find("age ("), std::string::npos) << "age is chosen in 90%: " << caution->message;
  EXPECT_EQ(ToString(caution->kind), "selection-stability");
}

TEST_F(ValidationCautions, AtSixtyPercentATermIsNotNamed) {
  RunResult run = *run_;
  run.validation = testing::FilledValidation(run, "grade", kStableInclusionShare);
  run.validation.bootstrap->substitutes.clear();
  EXPECT_EQ(Find(ComputeCautions(run), CautionKind::kSelectionStability), nullptr);
  // A candidate outside the final model is not named, however rarely chosen.
  run.validation = testing::FilledValidation(run, "noise", 0.01);
  run.validation.bootstrap->substitutes.clear();
  EXPECT_EQ(Find(ComputeCautions(run), CautionKind::kSelectionStability), nullptr);
}

TEST_F(ValidationCautions, EverySubstitutePairIsNamed) {
  RunResult run = *run_;
  run.validation = testing::FilledValidation(run);  // age and grade as a pair; every term at 90%
  const std::vector<Caution> cautions = ComputeCautions(run);  // Find points into it
  const Caution* caution = Find(cautions, CautionKind::kSelectionStability);
  ASSERT_NE(caution, nullptr);
  EXPECT_TRUE(caution->rarely_chosen.empty());
  ASSERT_EQ(caution->substitutes.size(), 1u);
  EXPECT_NE(caution->message.find("age and grade"), std::string::npos) << caution->message;
}

TEST_F(ValidationCautions, AHoldoutRmseMoreThanAQuarterAboveTheResidualSdIsNamed) {
  RunResult run = *run_;
  run.validation = testing::FilledValidation(run);
  const double sigma = *run.fit.criteria.sigma;
  run.validation.holdout->rmse = sigma * 1.26;
  const std::vector<Caution> cautions = ComputeCautions(run);
  const Caution* caution = Find(cautions, CautionKind::kHoldoutError);
  ASSERT_NE(caution, nullptr);
  EXPECT_EQ(caution->holdout_rmse, sigma * 1.26);
  EXPECT_EQ(caution->residual_sd, sigma);
  EXPECT_NE(caution->message.find("26.0% above the in-sample residual SD"), std::string::npos) << caution->message;
  EXPECT_NE(caution->message.find("common-practice threshold"), std::string::npos) << caution->message;
  EXPECT_EQ(ToString(caution->kind), "holdout-error");
  // At 25% and below: no caution.
  run.validation.holdout->rmse = sigma * kHoldoutErrorRatio;
  EXPECT_EQ(Find(ComputeCautions(run), CautionKind::kHoldoutError), nullptr);
  run.validation.holdout->rmse = sigma * 0.9;
  EXPECT_EQ(Find(ComputeCautions(run), CautionKind::kHoldoutError), nullptr);
}

}  // namespace
}  // namespace stepledger
