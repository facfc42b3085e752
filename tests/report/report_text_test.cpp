// The text report: the same content as the HTML report as terminal tables, from audits made by
// the real pipeline on the invented laptop data.

#include <gtest/gtest.h>

#include <sstream>
#include <string>

#include "stepledger/audit/audit_document.h"
#include "stepledger/audit/signature.h"
#include "stepledger/audit/validation_json.h"
#include "stepledger/engine/number_format.h"
#include "stepledger/report/report.h"
#include "support/audit_test_data.h"
#include "support/report_audits.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using nlohmann::json;

// The value of a fact line "  label:   value".
std::string Fact(const std::string& text, const std::string& label) {
  const std::size_t at = text.find("\n  " + label + ":");
  if (at == std::string::npos) return "(no fact " + label + ")";
  std::size_t start = at + 4 + label.size();
  while (start < text.size() && text[start] == ' ') ++start;
  return text.substr(start, text.find('\n', start) - start);
}

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
  EXPECT_LT(text.find("\nCautions for this run\n"), text.find("\nThe plan\n"));
  // One chosen candidate per move, and the ineligible reasons.
  int moves = 0, chosen = 0;
  for (const json& step : made.audit["steps"]) moves += step["action"] == "add" || step["action"] == "remove";
  for (std::size_t at = text.find("  chosen\n"); at != std::string::npos; at = text.find("  chosen\n", at + 1)) ++chosen;
  EXPECT_EQ(chosen, moves);
  EXPECT_NE(text.find("ineligible: hierarchy"), std::string::npos);
  // Every coefficient row.
  for (const json& coefficient : made.audit["model"]["coefficients"]) {
    EXPECT_NE(text.find("\n    " + coefficient["name"].get<std::string>() + " "), std::string::npos)
        << coefficient["name"];
  }
  EXPECT_EQ(Fact(text, "Seal"), made.audit["seal"].get<std::string>() + " (recomputed: matches the content)");
  EXPECT_EQ(Fact(text, "Signature"), "absent");
  EXPECT_EQ(Fact(text, "Rows diagnosed"), "200");
  // 4/n with n = 200 (the rule, common practice), printed as every quantity is.
  EXPECT_NE(text.find("Cook's distance above 4/n = " + FormatQuantity(0.02, 3) + ","), std::string::npos) << text;
}

// The integrity block names the signature's standard and key, and checks it as verify does
// without --public-key (against the key the audit records).
TEST(TextReport, ShowsTheJwsSignatureAndItsKeyThumbprint) {
  testing::TempDir folder;
  auto made = testing::MakeReportAudit(folder, "signed", testing::LaptopCsv(), testing::HierarchyLaptopPlan());
  // RFC 8032 §7.1 TEST 1's key (RFC 8037 Appendix A.1's), whose RFC 7638 thumbprint RFC 8037 A.3 gives.
  const Ed25519Signer signer =
      Ed25519Signer::FromRawPrivateKeyHex("9d61b19deffd5a60ba844af492ec2cc44449c5697b326919703bac031cae7f60");
  json document = made.audit;
  SealAuditDocument(document, &signer);
  EXPECT_EQ(Fact(RenderTextReport(document, nullptr), "Signature"),
            "present, JWS EdDSA (Ed25519; RFC 7515, RFC 8037), key thumbprint (RFC 7638) "
            "kPrK_qmxVWaYVA9wwBF6Iuo3vVzz7TxHCTwXBygrS4k (verifies against that key)");
  // Re-signed over another seal: the report says it does not verify.
  json edited = document;
  edited["model"]["rss"] = 1.0;
  SealAuditDocument(edited);
  edited["signature"] = document["signature"];
  EXPECT_NE(Fact(RenderTextReport(edited, nullptr), "Signature").find("(DOES NOT verify against that key)"),
            std::string::npos);
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
  EXPECT_NE(text.find("\nValidation\n"), std::string::npos) << "the k-fold part is always recorded";

  json with_validation = made.audit;
  ValidationResult validation;
  validation.folds.settings = {5, 1};
  validation.folds.rmse = 25.5;
  validation.folds.per_fold = {{0, 40, 40, 26010}};
  with_validation["validation"] = ValidationToJson(validation);
  const std::string validated = RenderTextReport(with_validation, nullptr);
  EXPECT_NE(validated.find("5-fold RMSE (seed 1)"), std::string::npos) << validated;
  EXPECT_NE(validated.find("25.5"), std::string::npos);
  EXPECT_NE(validated.find("Held-out error by fold"), std::string::npos);
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
  EXPECT_NE(text.find("entry_p = 0.0400"), std::string::npos) << text;
  EXPECT_NE(text.find("exit_p = 0.0800"), std::string::npos);
  EXPECT_NE(text.find("Always in the model: age."), std::string::npos);
  EXPECT_NE(text.find("Never allowed: screen."), std::string::npos);
  EXPECT_NE(text.find("At most 4 terms"), std::string::npos);
  EXPECT_NE(text.find("Rows are not weighted."), std::string::npos);
  EXPECT_NE(text.find("categorical grade, one indicator per level against the baseline B"), std::string::npos);
  // The HTML of a p-value rule plots -log10(p) against the plan's threshold.
  const std::string html = RenderHtmlReport(made.audit, nullptr);
  EXPECT_NE(html.find("−log10(p) of the partial F test"), std::string::npos);
  EXPECT_NE(html.find(">entry_p = 0.0400<"), std::string::npos);
}

}  // namespace
}  // namespace stepledger
