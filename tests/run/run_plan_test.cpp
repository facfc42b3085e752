// RunPlan (run/run_plan.h): one run composed once. Invented data whose true model the test
// knows: price = 100 - 2 age + 15 [grade = A] + noise, with an extreme age in a row that is
// dropped for a missing grade.
#include "stepledger/run/run_plan.h"

#include <cmath>
#include <sstream>
#include <string>

#include <gtest/gtest.h>

#include "stepledger/engine/errors.h"
#include "stepledger/run/cautions.h"
#include "support/test_paths.h"
#include "support/test_random.h"

namespace stepledger {
namespace {

std::string MakeData() {
  testing::TestRandom random(20261202);
  std::ostringstream csv;
  csv << "price,age,grade,noise\n";
  for (int row = 0; row < 200; ++row) {
    const double age = 1 + row % 40;
    const bool a = row % 3 == 0;
    const double noise = random.Normal();
    csv << 100 - 2 * age + (a ? 15 : 0) + 0.5 * random.Normal() << "," << age << ","
        << (a ? "A" : "B") << "," << noise << "\n";
  }
  csv << "0,500,NA,0\n";  // dropped (missing grade): its age must not widen the range
  return csv.str();
}

LoadedPlan Plan(const std::string& method) {
  return ParsePlanText(R"({"response": "price", "terms": [
      {"name": "age", "column": "age"}, {"name": "grade", "categorical": "grade"},
      {"name": "noise", "column": "noise"}], "method": ")" + method + R"(", "criterion": "bic"})");
}

TEST(RunPlan, MethodNoneFitsEveryTermWithNoSelectionCaution) {
  testing::TempDir folder;
  const auto data = folder.Write("listings.csv", MakeData());
  const RunResult run = RunPlan(data, Plan("none"), RunOptions{});
  EXPECT_EQ(run.fit.terms, (std::vector<std::string>{"age", "grade", "noise"}));
  EXPECT_EQ(run.accounting.rows_read, 201u);
  EXPECT_EQ(run.accounting.rows_used, 200u);
  ASSERT_TRUE(run.diagnostics.has_value());
  const std::vector<Caution> cautions = ComputeCautions(run);
  for (const Caution& caution : cautions) {
    EXPECT_NE(caution.kind, CautionKind::kPostSelectionInference) << caution.message;
  }
}

TEST(RunPlan, StepwiseFindsTheTrueTermsAndCautionsAreTyped) {
  testing::TempDir folder;
  const auto data = folder.Write("listings.csv", MakeData());
  const RunResult run = RunPlan(data, Plan("stepwise"), RunOptions{});
  EXPECT_EQ(run.fit.terms, (std::vector<std::string>{"age", "grade"}));
  const std::vector<Caution> cautions = ComputeCautions(run);
  ASSERT_FALSE(cautions.empty());
  EXPECT_EQ(cautions.front().kind, CautionKind::kPostSelectionInference);
  EXPECT_EQ(cautions.front().candidate_terms, 3u);
  bool extrapolation = false, association = false;
  for (const Caution& caution : cautions) {
    if (caution.kind == CautionKind::kExtrapolation) {
      extrapolation = true;
      ASSERT_EQ(caution.ranges.size(), 1u);
      EXPECT_EQ(caution.ranges[0].column, "age");
      EXPECT_TRUE(caution.ranges[0].over_rows_used);
      EXPECT_EQ(caution.ranges[0].max, 40);  // not 500: that row was dropped
      EXPECT_NE(caution.message.find("age 1 to 40"), std::string::npos) << caution.message;
      ASSERT_TRUE(caution.max_leverage.has_value());
    }
    if (caution.kind == CautionKind::kAssociation) {
      association = true;
      EXPECT_NE(caution.message.find("protected characteristics"), std::string::npos);
    }
  }
  EXPECT_TRUE(extrapolation);
  EXPECT_TRUE(association);
}

TEST(RunPlan, APlanErrorNamesItsKeyBeforeAnyPass) {
  testing::TempDir folder;
  const auto data = folder.Write("listings.csv", MakeData());
  LoadedPlan plan = Plan("forward");
  plan.plan.search.keep = {"colour"};
  try {
    RunPlan(data, plan, RunOptions{});
    FAIL() << "expected PlanError";
  } catch (const PlanError& error) {
    EXPECT_EQ(error.key_path(), "keep[0]");
  }
  RunOptions options;
  options.threads = 0;
  EXPECT_THROW(RunPlan(data, Plan("forward"), options), InputError);
}

}  // namespace
}  // namespace stepledger
