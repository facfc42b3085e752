// The text report: the same content as the HTML report as terminal tables, from audits made by
// the real pipeline on the invented laptop data.

#include <gtest/gtest.h>

#include <sstream>
#include <string>

#include "stepledger/report/report.h"
#include "support/audit_test_data.h"
#include "support/report_audits.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using nlohmann::json;

// The rule of a step: the route table pads its columns, so a step is found by its rule text.
std::string Row(const json& step) { return step["rule"].get<std::string>(); }

TEST(TextReport, ListsEveryStepWithItsRuleAndEveryCaution) {
  testing::TempDir folder;
  const auto made = testing::MakeReportAudit(folder, "stepwise", testing::LaptopCsv(),
                                             testing::HierarchyLaptopPlan());
  const std::string text = RenderTextReport(made.audit, &made.diagnostics);
  for (const json& step : made.audit["steps"]) {
    EXPECT_NE(text.find(Row(step)), std::string::npos) << Row(step);
  }
  ASSERT_FALSE(made.audit["cautions"].empty());
  for (const json& caution : made.audit["cautions"]) {
    EXPECT_NE(text.find("! [" + caution["kind"].get<std::string>() + "] " + caution["message"].get<std::string>()),
              std::string::npos)
        << caution.dump();
  }
  // Cautions come before the plan.
  EXPECT_LT(text.find("CAUTIONS"), text.find("\nPlan\n"));
  // One CHOSEN per move, and the ineligible reasons.
  int moves = 0, chosen = 0;
  for (const json& step : made.audit["steps"]) moves += step["action"] == "add" || step["action"] == "remove";
  for (std::size_t at = text.find("CHOSEN"); at != std::string::npos; at = text.find("CHOSEN", at + 1)) ++chosen;
  EXPECT_EQ(chosen, moves);
  EXPECT_NE(text.find("ineligible: hierarchy"), std::string::npos);
  // Every coefficient row.
  for (const json& coefficient : made.audit["model"]["coefficients"]) {
    EXPECT_NE(text.find("\n  " + coefficient["name"].get<std::string>() + " "), std::string::npos)
        << coefficient["name"];
  }
  EXPECT_NE(text.find(made.audit["seal"].get<std::string>() + " (matches the content)"), std::string::npos);
  EXPECT_NE(text.find("Signature: absent"), std::string::npos);
  EXPECT_NE(text.find("200 rows diagnosed"), std::string::npos);
  EXPECT_NE(text.find("common practice thresholds: Cook's D > 4/n = 0.02,"), std::string::npos) << text;
}

TEST(TextReport, WithoutDiagnosticsSaysHowAndIsDeterministic) {
  testing::TempDir folder;
  const auto made = testing::MakeReportAudit(folder, "subsets", testing::LaptopCsv(),
                                             testing::HierarchyLaptopPlan("all-subsets"));
  const std::string text = RenderTextReport(made.audit, nullptr);
  EXPECT_EQ(text, RenderTextReport(made.audit, nullptr));
  EXPECT_NE(text.find("Run: stepledger report AUDIT.json --data subsets.csv"), std::string::npos);
  EXPECT_NE(text.find("All subsets: best BIC by model size"), std::string::npos);
  EXPECT_NE(text.find("Every kept subset:"), std::string::npos);
  EXPECT_NE(text.find("All subsets: for every model size"), std::string::npos);
  EXPECT_EQ(text.find("Validation"), std::string::npos);

  json with_validation = made.audit;
  with_validation["validation"] = {{"folds", {{{"fold", 1}, {"rmse", 25.5}}}}};
  const std::string validated = RenderTextReport(with_validation, nullptr);
  EXPECT_NE(validated.find("\nValidation\n"), std::string::npos);
  EXPECT_NE(validated.find("folds[0].rmse"), std::string::npos);
  EXPECT_NE(validated.find("25.5"), std::string::npos);
}

TEST(TextReport, PlanInWordsNamesThresholdsKeepNeverAndWeights) {
  std::string csv = testing::LaptopCsv();
  testing::TempDir folder;
  nlohmann::json plan = json::parse(testing::LaptopPlan("stepwise", "partial-f"));
  plan["keep"] = {"age"};
  plan["never"] = {"screen"};
  plan["max_terms"] = 4;
  plan["entry_p"] = 0.04;
  plan["exit_p"] = 0.08;
  const auto made = testing::MakeReportAudit(folder, "partial", csv, plan.dump());
  const std::string text = RenderTextReport(made.audit, nullptr);
  EXPECT_NE(text.find("entry_p = 0.04"), std::string::npos);
  EXPECT_NE(text.find("exit_p = 0.08"), std::string::npos);
  EXPECT_NE(text.find("Always in the model: age."), std::string::npos);
  EXPECT_NE(text.find("Never allowed: screen."), std::string::npos);
  EXPECT_NE(text.find("At most 4 terms"), std::string::npos);
  EXPECT_NE(text.find("Rows are not weighted."), std::string::npos);
  EXPECT_NE(text.find("categorical grade, one indicator per level against the baseline B"), std::string::npos);
  // The HTML of a p-value rule plots p-values against the plan's threshold.
  const std::string html = RenderHtmlReport(made.audit, nullptr);
  EXPECT_NE(html.find("p-value of the partial F test"), std::string::npos);
  EXPECT_NE(html.find(">entry_p<"), std::string::npos);
}

}  // namespace
}  // namespace stepledger
