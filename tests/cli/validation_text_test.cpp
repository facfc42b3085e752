// The validation results on the terminal (select and fit): the k-fold error beside the in-sample
// residual SD, the holdout lines and calibration table, the bootstrap summary; and the
// `validation` object of `select --json` and `fit --json` in the audit's shape. Validation numbers
// are invented (support/validation_fixture.h): these tests are about the rendering. The Hald
// cement data (Hald 1952, as used by NIST and most regression texts) drives the commands.

#include "stepledger/cli/validation_text.h"

#include <string>

#include <gtest/gtest.h>
#include <nlohmann/json.hpp>

#include "stepledger/engine/number_format.h"
#include "support/cli_run.h"
#include "support/test_paths.h"
#include "support/validation_fixture.h"

namespace stepledger {
namespace {

using testing::CliRun;
using testing::RunStepledger;

ValidationResult Filled() {
  return testing::FilledValidation({"age", "ram", "disk", "grade"}, {"age", "ram"},
                                   {{"intercept", 600.0}, {"age", -9.0}, {"ram", 12.0}}, 25.0, "ram", 0.45);
}

TEST(ValidationText, TheSummaryPutsTheKFoldErrorBesideTheResidualSd) {
  const std::string line = cli::ValidationSummaryText(Filled(), std::nullopt);
  EXPECT_EQ(line, "Error on unseen rows: 5-fold RMSE " + FormatQuantity(26.5) + " beside the in-sample residual SD " +
                      FormatQuantity(25.0) + " (fold seed 1)\n");
  ValidationResult undefined;
  undefined.folds.undefined_reason = "fold 3's training rows leave grade=C constant";
  const std::string undefined_line = cli::ValidationSummaryText(undefined, 31.5);
  EXPECT_NE(undefined_line.find("10-fold RMSE n/a (fold 3's training rows leave grade=C constant)"), std::string::npos)
      << undefined_line;
  EXPECT_NE(undefined_line.find("residual SD " + FormatQuantity(31.5)), std::string::npos) << "the fit's sigma";
}

TEST(ValidationText, TheDetailHasTheHoldoutCalibrationAndBootstrap) {
  const std::string text = cli::ValidationDetailText(Filled());
  for (const std::string& part :
       {std::string("Held-out rows (20.0% drawn with seed 7; errors are observed minus predicted)"),
        "rows 41, RMSE " + FormatQuantity(27.25) + ", mean error " + FormatQuantity(-1.5) +
            ", R² about their own mean " + FormatQuantity(0.93),
        std::string("2 outside the ranges, 1 above the largest leverage"),
        std::string("calibration by decile of prediction"),
        std::string("Stability over 200 bootstrap samples (seed 11)"),
        std::string("ram     45.0%"),
        std::string("samples by model size: 1 term 30, 2 terms 150, 3 terms 20\n"),
        std::string(" 70.0%  age, ram  (the chosen model)"),
        std::string("the chosen model is among them")}) {
    EXPECT_NE(text.find(part), std::string::npos) << part << "\n" << text;
  }
  // One table line per decile, the lowest predictions first.
  EXPECT_NE(text.find("\n         1         4             350            346\n"), std::string::npos) << text;
  EXPECT_NE(text.find("\n        10         4             800            806\n"), std::string::npos) << text;
  EXPECT_EQ(cli::ValidationDetailText(ValidationResult{}), "") << "no holdout, no bootstrap: nothing";
}

class ValidationCommands : public ::testing::Test {
 protected:
  void SetUp() override {
    // Hald cement data (Hald 1952; the 13 rows as printed by NIST and in Draper and Smith).
    data_ = folder_.Write("hald.csv",
                          "x1,x2,x3,x4,y\n7,26,6,60,78.5\n1,29,15,52,74.3\n11,56,8,20,104.3\n11,31,8,47,87.6\n"
                          "7,52,6,33,95.9\n11,55,9,22,109.2\n3,71,17,6,102.7\n1,31,22,44,72.5\n2,54,18,22,93.1\n"
                          "21,47,4,26,115.9\n1,40,23,34,83.8\n11,66,9,12,113.3\n10,68,8,12,109.4\n")
                .string();
  }
  testing::TempDir folder_;
  std::string data_;
};

TEST_F(ValidationCommands, SelectAndFitShowTheKFoldLineAndJsonCarriesTheValidationObject) {
  const CliRun text = RunStepledger({"select", data_, "--response", "y", "--method", "forward", "--criterion", "bic"});
  ASSERT_EQ(text.status, 0) << text.err;
  EXPECT_NE(text.out.find("Error on unseen rows: "), std::string::npos) << text.out;
  const CliRun json_run =
      RunStepledger({"select", data_, "--response", "y", "--method", "forward", "--criterion", "bic", "--json"});
  ASSERT_EQ(json_run.status, 0) << json_run.err;
  const nlohmann::json selected = nlohmann::json::parse(json_run.out);
  ASSERT_TRUE(selected.contains("validation"));
  for (const char* key : {"k", "seed", "rmse", "residual_sd", "per_fold"}) {
    EXPECT_TRUE(selected["validation"]["folds"].contains(key)) << key;
  }
  const std::string plan = folder_.Write("plan.json", R"({"response": "y", "terms": [
      {"name": "x1", "column": "x1"}, {"name": "x2", "column": "x2"}]})").string();
  const CliRun fit_text = RunStepledger({"fit", data_, "--plan", plan});
  ASSERT_EQ(fit_text.status, 0) << fit_text.err;
  EXPECT_NE(fit_text.out.find("Error on unseen rows: "), std::string::npos) << fit_text.out;
  const CliRun fit = RunStepledger({"fit", data_, "--plan", plan, "--json"});
  ASSERT_EQ(fit.status, 0) << fit.err;
  EXPECT_TRUE(nlohmann::json::parse(fit.out)["validation"].contains("folds"));
}

}  // namespace
}  // namespace stepledger
