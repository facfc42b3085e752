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

// Nothing to fit is bad input (exit 2), never a "model" with n = 0 and df -1 or a route that
// follows rounding errors (common practice: a regression needs rows and a response that varies).
std::string RunError(const std::string& csv, const std::string& plan_text) {
  testing::TempDir folder;
  const auto data = folder.Write("rows.csv", csv);
  try {
    RunPlan(data, ParsePlanText(plan_text), RunOptions{});
  } catch (const PlanError& error) {
    ADD_FAILURE() << "expected an InputError about the rows, got a PlanError: " << error.what();
  } catch (const InputError& error) {
    return error.what();
  }
  ADD_FAILURE() << "expected an InputError";
  return "";
}

constexpr const char* kAgePlan = R"({"response": "price", "weights": "w", "terms": [
    {"name": "age", "column": "age"}], "method": "forward", "criterion": "aic"})";

TEST(RunPlan, NoUsableRowSaysWhyEveryRowWasDropped) {
  // Three rows of weight 0 and two missing an age: every row is dropped (reasons in the
  // accounting's order: missing cells, then zero weights).
  std::string message = RunError("price,age,w\n1,2,0\n2,,1\n3,4,0\n4,NA,1\n5,6,0\n", kAgePlan);
  EXPECT_NE(message.find("rows.csv: no row can be used: all 5 rows read were dropped (2 with a missing cell in "
                         "column 'age', 3 with weight 0 in column 'w')"),
            std::string::npos)
      << message;
  // A header alone: the design already finds the response empty (a PlanError at its key).
  testing::TempDir folder;
  const auto header_only = folder.Write("header.csv", "price,age,w\n");
  EXPECT_THROW(RunPlan(header_only, ParsePlanText(kAgePlan), RunOptions{}), PlanError);
}

TEST(RunPlan, AConstantResponseIsRefusedWithAnIntercept) {
  std::string message = RunError("price,age,w\n250,1,1\n250,2,1\n250,3,2\n7,4,0\n", kAgePlan);
  EXPECT_NE(message.find("rows.csv: response 'price' is 250 in the 3 rows used: with an intercept there is "
                         "nothing left to explain"),
            std::string::npos)
      << message;
  EXPECT_NE(message.find("the rows dropped (1 row)"), std::string::npos) << message;
  // Values that differ only in their last bits count as constant: 250 and the next doubles.
  message = RunError("price,age,w\n250,1,1\n250.00000000000006,2,1\n250.0000000000001,3,1\n", kAgePlan);
  EXPECT_NE(message.find("only varies from 250 to 250.0000000000001 in the 3 rows used"), std::string::npos)
      << message;
  // Under "log" the values are said on the response's own scale.
  message = RunError("price,age\n8,1\n8,2\n8,3\n",
                     R"({"response": "price", "response_transform": "log", "terms": [{"name": "age", "column": "age"}],
                         "method": "none"})");
  EXPECT_NE(message.find("response 'price' is 8 in the 3 rows used"), std::string::npos) << message;
  // A response of 0 throughout has nothing to fit even without an intercept.
  message = RunError("price,age\n0,1\n0,2\n0,3\n",
                     R"({"response": "price", "intercept": false, "terms": [{"name": "age", "column": "age"}],
                         "method": "none"})");
  EXPECT_NE(message.find("response 'price' is 0 in the 3 rows used: there is nothing to fit"), std::string::npos)
      << message;
}

TEST(RunPlan, AConstantResponseWithoutAnInterceptIsAModel) {
  // y = 5 throughout is 2.5 age when age = 2 throughout: nothing is refused.
  testing::TempDir folder;
  const auto data = folder.Write("rows.csv", "price,age\n5,2\n5,2\n5,2\n5,2\n");
  const RunResult run = RunPlan(data, ParsePlanText(R"({"response": "price", "intercept": false,
      "terms": [{"name": "age", "column": "age"}], "method": "none"})"), RunOptions{});
  ASSERT_EQ(run.fit.coefficients.size(), 1u);
  EXPECT_DOUBLE_EQ(run.fit.coefficients[0].estimate, 2.5);
  // Nearly constant but varying beyond rounding: a model, with an intercept too.
  const auto varying = folder.Write("varying.csv", "price,age\n250,1\n250.000001,2\n250.000003,3\n250.000002,4\n");
  const RunResult near = RunPlan(varying, ParsePlanText(R"({"response": "price", "terms": [
      {"name": "age", "column": "age"}], "method": "none"})"), RunOptions{});
  EXPECT_EQ(near.fit.n, 4u);
}

}  // namespace
}  // namespace stepledger
