// verify and the validation section: without data its structure is checked (naming the key);
// with data the replay's validation must equal the recorded one, counts exactly and other numbers
// within the replay's relative tolerance. Data: the invented laptop stock
// (support/audit_test_data.h); validation numbers invented (support/validation_fixture.h).

#include <gtest/gtest.h>

#include "stepledger/audit/audit_document.h"
#include "stepledger/audit/audit_verify.h"
#include "stepledger/audit/validation_json.h"
#include "support/audit_test_data.h"
#include "support/laptop_run_suite.h"
#include "support/test_paths.h"
#include "support/validation_fixture.h"

namespace stepledger {
namespace {

using nlohmann::json;
using Check = VerifyReport::Check;

class ValidationVerify : public testing::LaptopRunSuite {};

TEST_F(ValidationVerify, AnUntouchedAuditHoldsWithAndWithoutData) {
  const json document = SealedAudit(run_->validation);
  const VerifyReport record = CheckAuditIntegrity(document);
  EXPECT_TRUE(record.Holds()) << record.FullReport();
  EXPECT_EQ(record.validation, Check::kHolds);
  VerifyOptions options;
  options.data = data_;
  const VerifyReport replayed = VerifyAudit(document, options);
  EXPECT_TRUE(replayed.Holds()) << replayed.FullReport();
  EXPECT_EQ(replayed.ToJson()["checks"]["validation"], "holds");
}

TEST_F(ValidationVerify, WithoutDataABadlyShapedSectionIsNamed) {
  json document = SealedAudit(testing::FilledValidation(*run_));
  document["validation"]["folds"]["per_fold"][3]["sse"] = "27376.5";
  SealAuditDocument(document);  // resealed: only the structure check can see it
  const VerifyReport report = CheckAuditIntegrity(document);
  EXPECT_EQ(report.sections, Check::kHolds);
  EXPECT_EQ(report.validation, Check::kFails);
  ASSERT_FALSE(report.problems.empty());
  EXPECT_NE(report.problems.front().find("key 'validation.folds.per_fold[3].sse'"), std::string::npos)
      << report.problems.front();
}

TEST_F(ValidationVerify, AMissingSectionIsNamedInAnAuditOfThisVersion) {
  json document = SealedAudit(run_->validation);
  document.erase("validation");
  SealAuditDocument(document);
  const VerifyReport report = CheckAuditIntegrity(document);
  EXPECT_FALSE(report.Holds());
  EXPECT_NE(report.FullReport().find("key 'validation' is missing"), std::string::npos) << report.FullReport();
}

TEST_F(ValidationVerify, TheReplayFindsAChangedValidationNumber) {
  json document = SealedAudit(run_->validation);
  // The replay recomputes the section; a resealed edit of a count differs from it exactly.
  document["validation"]["folds"]["seed"] = document["validation"]["folds"]["seed"].get<std::uint64_t>() + 1;
  SealAuditDocument(document);
  VerifyOptions options;
  options.data = data_;
  const VerifyReport report = VerifyAudit(document, options);
  EXPECT_EQ(report.replay, Check::kFails);
  std::string all;
  for (const std::string& problem : report.problems) all += problem + "\n";
  EXPECT_NE(all.find("replay differs: key 'validation.folds.seed'"), std::string::npos) << all;
}

TEST_F(ValidationVerify, NumbersAgreeWithinTheToleranceAndCountsExactly) {
  const json recorded = ValidationToJson(testing::FilledValidation(*run_));
  json replayed = recorded;
  const double sse = recorded["folds"]["per_fold"][3]["sse"].get<double>();
  replayed["folds"]["per_fold"][3]["sse"] = sse * (1 + 1e-12);
  EXPECT_EQ(FirstValidationDifference(recorded, replayed, 1e-9), std::nullopt) << "within 1e-9 relative";
  replayed["folds"]["per_fold"][3]["sse"] = sse * (1 + 1e-6);
  const auto difference = FirstValidationDifference(recorded, replayed, 1e-9);
  ASSERT_TRUE(difference);
  EXPECT_NE(difference->find("key 'validation.folds.per_fold[3].sse'"), std::string::npos) << *difference;
  // A count: one row more is a difference even where the relative tolerance would let it pass.
  json counts = recorded;
  counts["holdout"]["rows"] = recorded["holdout"]["rows"].get<std::uint64_t>() + 1;
  const auto count_difference = FirstValidationDifference(recorded, counts, 0.5);
  ASSERT_TRUE(count_difference);
  EXPECT_NE(count_difference->find("key 'validation.holdout.rows'"), std::string::npos) << *count_difference;
  json share = recorded;
  share["bootstrap"]["inclusion"][0]["frequency"] = 0.905;
  EXPECT_TRUE(FirstValidationDifference(recorded, share, 1e-9));
}

}  // namespace
}  // namespace stepledger
