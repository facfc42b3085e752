// compare and the validation sections: the k-fold and holdout RMSE side by side, and every term's
// bootstrap inclusion frequency old and new, in the typed comparison, the text and the JSON.
// Data: the invented laptop stock (support/audit_test_data.h); validation numbers invented.

#include <gtest/gtest.h>

#include "stepledger/audit/audit_compare.h"
#include "stepledger/audit/audit_document.h"
#include "stepledger/engine/number_format.h"
#include "support/audit_test_data.h"
#include "support/laptop_run_suite.h"
#include "support/test_paths.h"
#include "support/validation_fixture.h"

namespace stepledger {
namespace {

using nlohmann::json;

class ValidationCompare : public testing::LaptopRunSuite {};

TEST_F(ValidationCompare, InclusionChangesAreShownBesideTheRoute) {
  const ValidationResult before = testing::FilledValidation(*run_);
  ValidationResult after = before;
  after.bootstrap->inclusion[1].frequency = 0.55;
  after.folds.rmse = 30.0;
  after.holdout->rmse = 31.0;
  const AuditComparison comparison = CompareAudits(SealedAudit(before), SealedAudit(after));
  const ValidationComparisonPart& part = comparison.validation;
  ASSERT_TRUE(part.inclusion_compared);
  ASSERT_EQ(part.inclusion.size(), before.bootstrap->inclusion.size());
  const InclusionChange& moved = part.inclusion[1];
  EXPECT_EQ(moved.term, before.bootstrap->inclusion[1].term);
  EXPECT_EQ(moved.old_frequency, before.bootstrap->inclusion[1].frequency);
  EXPECT_EQ(moved.new_frequency, 0.55);
  EXPECT_EQ(part.largest_change, 1u);
  EXPECT_TRUE(part.folds_compared);
  EXPECT_EQ(part.old_folds_rmse, 26.5);
  EXPECT_EQ(part.new_folds_rmse, 30.0);
  EXPECT_TRUE(part.holdout_compared);
  EXPECT_EQ(part.new_holdout_rmse, 31.0);

  const std::string text = comparison.FullReport();
  const std::string old_share = FormatPercent(before.bootstrap->inclusion[1].frequency);
  EXPECT_NE(text.find("bootstrap inclusion"), std::string::npos) << text;
  EXPECT_NE(text.find(moved.term), std::string::npos) << text;
  EXPECT_NE(text.find(old_share + " -> 55.0%"), std::string::npos) << text;
  EXPECT_NE(text.find("k-fold RMSE: " + FormatQuantity(26.5) + " -> " + FormatQuantity(30.0)), std::string::npos) << text;
  EXPECT_NE(text.find("holdout RMSE: " + FormatQuantity(27.25) + " -> " + FormatQuantity(31.0)), std::string::npos) << text;
  EXPECT_LT(text.find("route:"), text.find("  bootstrap inclusion (share")) << "beside (after) the route";
  EXPECT_NE(comparison.BriefReport().find("Largest change in bootstrap inclusion: " + moved.term), std::string::npos)
      << comparison.BriefReport();

  const json as_json = comparison.ToJson();
  EXPECT_EQ(as_json["validation"]["inclusion"][1]["new"], 0.55);
  EXPECT_EQ(as_json["validation"]["folds_rmse"]["old"], 26.5);
  EXPECT_EQ(as_json["validation"]["holdout_rmse"]["new"], 31.0);
}

TEST_F(ValidationCompare, WithoutBootstrapOnOneSideInclusionIsNotCompared) {
  ValidationResult before = testing::FilledValidation(*run_);
  const ValidationResult after = before;
  before.bootstrap.reset();
  before.holdout.reset();
  const AuditComparison comparison = CompareAudits(SealedAudit(before), SealedAudit(after));
  EXPECT_FALSE(comparison.validation.inclusion_compared);
  EXPECT_FALSE(comparison.validation.holdout_compared);
  EXPECT_TRUE(comparison.validation.folds_compared);
  EXPECT_EQ(comparison.FullReport().find("bootstrap inclusion"), std::string::npos);
  EXPECT_EQ(comparison.BriefReport().find("bootstrap"), std::string::npos);
}

TEST_F(ValidationCompare, AnAuditWithoutTheSectionComparesAsBefore) {
  json old_audit = SealedAudit(testing::FilledValidation(*run_));
  old_audit.erase("validation");  // an audit made before validation existed
  const AuditComparison comparison = CompareAudits(old_audit, SealedAudit(testing::FilledValidation(*run_)));
  EXPECT_FALSE(comparison.validation.folds_compared);
  EXPECT_FALSE(comparison.validation.inclusion_compared);
}

}  // namespace
}  // namespace stepledger
