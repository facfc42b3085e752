// Verification of audits: every kind of tampering is caught and named, controls show that the
// checks are not vacuous, and a replay on the data finds the first divergence.

#include "stepledger/audit/audit_verify.h"

#include <algorithm>

#include <gtest/gtest.h>

#include "stepledger/audit/audit_compare.h"
#include "stepledger/audit/audit_document.h"
#include "stepledger/audit/canonical_json.h"
#include "stepledger/engine/fingerprint.h"
#include "support/audit_test_data.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using nlohmann::json;
using Check = VerifyReport::Check;

class AuditVerify : public ::testing::Test {
 protected:
  static void SetUpTestSuite() {
    folder_ = new testing::TempDir();
    data_ = folder_->Write("laptops.csv", testing::LaptopCsv());
    sealed_ = new json(BuildAuditDocument(RunPlan(data_, ParsePlanText(testing::LaptopPlan()), {})));
    SealAuditDocument(*sealed_);
  }
  static void TearDownTestSuite() {
    delete sealed_;
    delete folder_;
  }
  static std::string FirstProblem(const json& document) {
    const VerifyReport report = CheckAuditIntegrity(document);
    return report.problems.empty() ? std::string("(none)") : report.problems.front();
  }
  static testing::TempDir* folder_;
  static std::filesystem::path data_;
  static json* sealed_;
};
testing::TempDir* AuditVerify::folder_ = nullptr;
std::filesystem::path AuditVerify::data_;
json* AuditVerify::sealed_ = nullptr;

TEST_F(AuditVerify, AnUntamperedAuditHolds) {
  const VerifyReport report = CheckAuditIntegrity(*sealed_);
  EXPECT_TRUE(report.Holds()) << report.FullReport();
  EXPECT_EQ(report.chain, Check::kHolds);
  EXPECT_EQ(report.sections, Check::kHolds);
  EXPECT_EQ(report.seal, Check::kHolds);
  EXPECT_EQ(report.signature, Check::kNotRun);
}

TEST_F(AuditVerify, ANumberInACandidateTableIsNamedByItsStep) {
  json tampered = *sealed_;
  json& rss = tampered["steps"][1]["candidates"][0]["rss"];
  rss = rss.get<double>() * 1.000001;
  EXPECT_EQ(FirstProblem(tampered).rfind("step 1 [", 0), 0u) << FirstProblem(tampered);
  EXPECT_NE(FirstProblem(tampered).find("digest does not match"), std::string::npos);
}

TEST_F(AuditVerify, AReorderedStepIsNamed) {
  json tampered = *sealed_;
  std::swap(tampered["steps"][1], tampered["steps"][2]);
  const std::string problem = FirstProblem(tampered);
  EXPECT_NE(problem.find("step 1 (recorded index 2)"), std::string::npos) << problem;
  EXPECT_NE(problem.find("a step was moved or deleted"), std::string::npos) << problem;
}

TEST_F(AuditVerify, ADeletedStepIsNamed) {
  json tampered = *sealed_;
  tampered["steps"].erase(2);
  const std::string problem = FirstProblem(tampered);
  EXPECT_NE(problem.find("step 2 (recorded index 3)"), std::string::npos) << problem;

  json last_deleted = *sealed_;
  last_deleted["steps"].erase(last_deleted["steps"].size() - 1);
  const VerifyReport report = CheckAuditIntegrity(last_deleted);
  ASSERT_FALSE(report.Holds());
  EXPECT_NE(report.problems.front().find("a step was added or deleted"), std::string::npos)
      << report.problems.front();
}

TEST_F(AuditVerify, AnEditedPlanIsNamed) {
  json tampered = *sealed_;
  tampered["plan"]["normalised"]["entry_p"] = 0.2;
  EXPECT_EQ(FirstProblem(tampered), "key 'plan' does not match its digest: it was edited");
  // The chain starts from the plan: the genesis no longer matches either.
  const VerifyReport report = CheckAuditIntegrity(tampered);
  EXPECT_EQ(report.chain, Check::kFails);
}

TEST_F(AuditVerify, AChangedFinalModelIsNamed) {
  json tampered = *sealed_;
  json& estimate = tampered["model"]["coefficients"][1]["estimate"];
  estimate = estimate.get<double>() + 1.0;
  EXPECT_EQ(FirstProblem(tampered), "key 'model' does not match its digest: it was edited");
}

TEST_F(AuditVerify, AnEditedTimeFieldBreaksTheSeal) {
  json tampered = *sealed_;
  tampered["created_at"] = "1999-01-01T00:00:00Z";
  EXPECT_EQ(FirstProblem(tampered).rfind("seal does not match", 0), 0u) << FirstProblem(tampered);
}

TEST_F(AuditVerify, ControlARecomputedSealStillFailsOnTheStepDigests) {
  // A verifier that only checked the seal would accept this file.
  json tampered = *sealed_;
  json& score = tampered["steps"][2]["candidates"][1]["score"];
  score = score.is_number() ? json(score.get<double>() - 3.0) : json(1.0);
  json unsealed = tampered;
  unsealed.erase("seal");
  tampered["seal"] = ToHex(Sha256(CanonicalJson(unsealed)));
  const VerifyReport report = CheckAuditIntegrity(tampered);
  EXPECT_EQ(report.seal, Check::kHolds) << "the test recomputed the seal correctly";
  EXPECT_EQ(report.chain, Check::kFails);
  ASSERT_FALSE(report.Holds());
  EXPECT_EQ(report.problems.front().rfind("step 2 [", 0), 0u) << report.problems.front();
}

TEST_F(AuditVerify, ControlAReorderedButIdenticalDocumentHolds) {
  // Digests cover content, not bytes: other key order and number spelling verify.
  const json reparsed = json::parse(sealed_->dump(7));
  EXPECT_TRUE(CheckAuditIntegrity(reparsed).Holds());
}

TEST_F(AuditVerify, ReplayOnTheOriginalDataHolds) {
  VerifyOptions options;
  options.data = data_;
  const VerifyReport report = VerifyAudit(*sealed_, options);
  EXPECT_TRUE(report.Holds()) << report.FullReport();
  EXPECT_EQ(report.fingerprint, Check::kHolds);
  EXPECT_EQ(report.replay, Check::kHolds);
}

TEST_F(AuditVerify, WithoutDataItSaysTheFingerprintAndReplayWereNotChecked) {
  const VerifyReport report = VerifyAudit(*sealed_, VerifyOptions{});
  ASSERT_TRUE(report.Holds()) << report.FullReport();
  EXPECT_FALSE(report.DataChecked());
  const std::string text = report.FullReport();
  EXPECT_NE(text.find("data fingerprint and replay: NOT CHECKED"), std::string::npos) << text;
  EXPECT_NE(text.find("--data FILE"), std::string::npos) << "says how to check them: " << text;
  EXPECT_EQ(text.find("The audit holds.\n"), std::string::npos) << "no unqualified verdict: " << text;
  EXPECT_NE(text.find("the data it was made from were not checked"), std::string::npos) << text;
  const json result = report.ToJson();
  EXPECT_EQ(result["data_checked"], false);
  EXPECT_EQ(result["not_checked"], json({"fingerprint", "replay"}));
  EXPECT_NE(result["how_to_check"].get<std::string>().find("--data FILE"), std::string::npos);
}

TEST_F(AuditVerify, ControlWithDataNothingIsLeftUnchecked) {
  VerifyOptions options;
  options.data = data_;
  const VerifyReport report = VerifyAudit(*sealed_, options);
  ASSERT_TRUE(report.Holds()) << report.FullReport();
  EXPECT_TRUE(report.DataChecked());
  EXPECT_EQ(report.FullReport().find("NOT CHECKED"), std::string::npos) << report.FullReport();
  EXPECT_NE(report.FullReport().find("The audit holds.\n"), std::string::npos);
  EXPECT_EQ(report.ToJson()["not_checked"], json::array());
  EXPECT_TRUE(report.ToJson()["how_to_check"].is_null());
}

TEST_F(AuditVerify, ReplayReportsAFingerprintMismatchOnAnyByteChange) {
  // The same values with other bytes (a trailing blank line is not a record): only the
  // fingerprint can tell.
  const auto changed = folder_->Write("laptops-bytes.csv", testing::LaptopCsv() + "\n");
  VerifyOptions options;
  options.data = changed;
  const VerifyReport report = VerifyAudit(*sealed_, options);
  EXPECT_EQ(report.fingerprint, Check::kFails);
  EXPECT_EQ(report.replay, Check::kHolds) << report.FullReport();
  ASSERT_FALSE(report.Holds());
  EXPECT_EQ(report.problems.front().rfind("fingerprint mismatch: the data are not the bytes the audit "
                                          "was made from", 0),
            0u)
      << report.problems.front();
}

TEST_F(AuditVerify, ReplayNamesTheFirstStepWhereTheRouteDiverges) {
  // One row changed: a laptop with an absurd battery count and price makes battery_cycles
  // (no effect in the true model) look strong, so the route changes.
  std::string csv = testing::LaptopCsv();
  const std::size_t row_start = csv.find('\n') + 1;
  const std::size_t row_end = csv.find('\n', row_start);
  std::vector<std::string> cells;
  std::stringstream row(csv.substr(row_start, row_end - row_start));
  for (std::string cell; std::getline(row, cell, ',');) cells.push_back(cell);
  cells[4] = "90000";   // battery_cycles
  cells[6] = "60000";   // price
  std::string changed_row;
  for (const std::string& cell : cells) changed_row += (changed_row.empty() ? "" : ",") + cell;
  csv.replace(row_start, row_end - row_start, changed_row);
  const auto changed = folder_->Write("laptops-row.csv", csv);

  // The route on the changed data, run independently, says where the routes part.
  const json other = BuildAuditDocument(RunPlan(changed, ParsePlanText(testing::LaptopPlan()), {}));
  const AuditComparison comparison = CompareAudits(*sealed_, other);
  ASSERT_FALSE(comparison.route.same) << "the changed row must change the route";
  ASSERT_TRUE(comparison.route.first_difference_step.has_value());
  const std::size_t expected_step = *comparison.route.first_difference_step;

  VerifyOptions options;
  options.data = changed;
  const VerifyReport report = VerifyAudit(*sealed_, options);
  EXPECT_EQ(report.fingerprint, Check::kFails);
  EXPECT_EQ(report.replay, Check::kFails);
  const auto route = std::find_if(report.problems.begin(), report.problems.end(), [](const std::string& p) {
    return p.rfind("route diverges at step ", 0) == 0;
  });
  ASSERT_NE(route, report.problems.end()) << report.FullReport();
  EXPECT_EQ(route->rfind("route diverges at step " + std::to_string(expected_step) + ":", 0), 0u) << *route;
}

TEST(JsonDifference, NamesTheKeyPathAndUsesTheRelativeTolerance) {
  const json a = {{"model", {{"coefficients", {{{"estimate", 1.0}}, {{"estimate", 2.0}}}}}}};
  json b = a;
  b["model"]["coefficients"][1]["estimate"] = 2.0 * (1 + 5e-10);
  EXPECT_FALSE(FirstJsonDifference(a, b, "", 1e-9).has_value()) << "within 1e-9 relative";
  b["model"]["coefficients"][1]["estimate"] = 2.0 * (1 + 5e-9);
  const auto difference = FirstJsonDifference(a, b, "", 1e-9);
  ASSERT_TRUE(difference.has_value());
  EXPECT_EQ(difference->rfind("key 'model.coefficients[1].estimate' is 2.0 in the audit", 0), 0u) << *difference;
  b = a;
  b["model"]["coefficients"][0]["name"] = "x";
  EXPECT_EQ(*FirstJsonDifference(a, b, "", 1e-9), "key 'model.coefficients[0].name' is missing in the audit");
}

}  // namespace
}  // namespace stepledger
