// The audit's validation section: written in the contract's shape, read back equal, its keys
// checked by type and range with errors naming the key, and an audit with every part accepted by
// the JSON Schema. Data: the invented laptop stock of support/audit_test_data.h; the validation
// numbers are invented (support/validation_fixture.h): these tests are about recording them.

#include "stepledger/audit/validation_json.h"

#include <limits>

#include <gtest/gtest.h>

#include "stepledger/audit/audit_document.h"
#include "stepledger/engine/errors.h"
#include "support/audit_test_data.h"
#include "support/laptop_run_suite.h"
#include "support/test_paths.h"
#include "support/validation_fixture.h"

namespace stepledger {
namespace {

using nlohmann::json;

class ValidationJson : public testing::LaptopRunSuite {
 protected:
  static std::string ErrorOf(const json& validation) {
    try {
      ValidationFromJson(validation, "audit.json");
    } catch (const InputError& error) {
      return error.what();
    }
    return "(no error)";
  }
};

TEST_F(ValidationJson, AFilledResultReadsBackEqual) {
  const ValidationResult filled = testing::FilledValidation(*run_);
  const json written = ValidationToJson(filled);
  EXPECT_EQ(ValidationFromJson(written), filled);
  // Through the text too: full precision survives serialisation.
  EXPECT_EQ(ValidationFromJson(json::parse(written.dump())), filled);
}

TEST_F(ValidationJson, TheShapeIsTheContracts) {
  const json written = ValidationToJson(testing::FilledValidation(*run_));
  for (const char* key : {"k", "seed", "rmse", "residual_sd", "per_fold"}) EXPECT_TRUE(written["folds"].contains(key)) << key;
  EXPECT_EQ(written["folds"]["per_fold"][3], (json{{"fold", 3}, {"rows", 43}, {"weight", 43.0}, {"sse", 27376.5}}));
  EXPECT_TRUE(written["folds"]["k"].is_number_integer()) << "counts are JSON integers";
  for (const char* key : {"fraction", "seed", "rows", "weight", "rmse", "mean_error", "r2", "rows_outside_ranges",
                          "rows_high_leverage", "calibration"}) {
    EXPECT_TRUE(written["holdout"].contains(key)) << key;
  }
  EXPECT_EQ(written["holdout"]["calibration"].size(), 10u);
  for (const char* key : {"replicates", "seed", "inclusion", "sizes", "models", "chosen_among_top", "coefficients",
                          "substitutes"}) {
    EXPECT_TRUE(written["bootstrap"].contains(key)) << key;
  }
  EXPECT_TRUE(written["bootstrap"]["coefficients"][0]["conditional"].is_array());
}

TEST_F(ValidationJson, UndefinedValuesAreNullAndAbsentPartsAreOmitted) {
  ValidationResult folds_only;
  folds_only.folds.undefined_reason = "fold 2's training rows leave a term constant";
  const json written = ValidationToJson(folds_only);
  EXPECT_TRUE(written["folds"]["rmse"].is_null());
  EXPECT_EQ(written["folds"]["undefined_reason"], "fold 2's training rows leave a term constant");
  EXPECT_FALSE(written.contains("holdout"));
  EXPECT_FALSE(written.contains("bootstrap"));
  EXPECT_EQ(ValidationFromJson(written), folds_only);
  // A coefficient no replicate held has no conditional interval: null.
  ValidationResult with_bootstrap = testing::FilledValidation(*run_);
  with_bootstrap.bootstrap->coefficients[0].conditional.reset();
  const json again = ValidationToJson(with_bootstrap);
  EXPECT_TRUE(again["bootstrap"]["coefficients"][0]["conditional"].is_null());
  EXPECT_EQ(ValidationFromJson(again), with_bootstrap);
}

TEST_F(ValidationJson, TheLargestSeedReadsBackWithoutWrapping) {
  ValidationResult validation;
  validation.folds.settings.seed = std::numeric_limits<std::uint64_t>::max();
  EXPECT_EQ(ValidationFromJson(json::parse(ValidationToJson(validation).dump())), validation);
}

TEST_F(ValidationJson, BadValuesNameTheKey) {
  const json good = ValidationToJson(testing::FilledValidation(*run_));
  json bad = good;
  bad["folds"]["per_fold"][3]["sse"] = "12";
  EXPECT_NE(ErrorOf(bad).find("audit.json: key 'validation.folds.per_fold[3].sse': expected a number"), std::string::npos)
      << ErrorOf(bad);
  bad = good;
  bad["folds"]["k"] = 101;
  EXPECT_NE(ErrorOf(bad).find("key 'validation.folds.k'"), std::string::npos) << ErrorOf(bad);
  bad = good;
  bad["holdout"]["fraction"] = 1;
  EXPECT_NE(ErrorOf(bad).find("key 'validation.holdout.fraction'"), std::string::npos) << ErrorOf(bad);
  bad = good;
  bad["holdout"]["calibration"][2]["decile"] = 11;
  EXPECT_NE(ErrorOf(bad).find("key 'validation.holdout.calibration[2].decile'"), std::string::npos) << ErrorOf(bad);
  bad = good;
  bad["bootstrap"]["inclusion"][0]["frequency"] = 1.5;
  EXPECT_NE(ErrorOf(bad).find("key 'validation.bootstrap.inclusion[0].frequency'"), std::string::npos) << ErrorOf(bad);
  bad = good;
  bad["bootstrap"]["coefficients"][1]["unconditional"] = json::array({1.0});
  EXPECT_NE(ErrorOf(bad).find("key 'validation.bootstrap.coefficients[1].unconditional'"), std::string::npos)
      << ErrorOf(bad);
  bad = good;
  bad["folds"]["seed"] = -1;
  EXPECT_NE(ErrorOf(bad).find("key 'validation.folds.seed'"), std::string::npos) << ErrorOf(bad);
  bad = good;
  bad.erase("folds");
  EXPECT_NE(ErrorOf(bad).find("key 'validation.folds': missing"), std::string::npos) << ErrorOf(bad);
}

TEST_F(ValidationJson, TheAuditRecordsTheSectionAndItsDigest) {
  const ValidationResult filled = testing::FilledValidation(*run_);
  const json document = SealedAudit(filled);
  EXPECT_EQ(document["validation"], ValidationToJson(filled));
  EXPECT_TRUE(document["digests"]["sections"].contains("validation")) << "sealed like the other sections";
  EXPECT_FALSE(document["data"].contains("rows_held_out")) << "the plan holds no rows out";
}

TEST_F(ValidationJson, AnAuditWithEveryPartMeetsTheSchema) {
  RunResult run = *run_;
  run.validation = testing::FilledValidation(run, "age", 0.4);
  run.plan.plan.search.holdout = HoldoutSettings{0.2, 7};
  run.accounting.rows_held_out = 41;
  AuditOutputOptions output;
  output.folder = folder_->path() / "every-part";
  const json document = WriteAuditDocument(run, {}, output);
  EXPECT_EQ(document["data"]["rows_held_out"], 41);
  const std::string problems = testing::ValidateAuditAgainstSchema(output.folder / "audit.json");
  if (problems == "skip") GTEST_SKIP() << "python3-jsonschema is missing for " << testing::ReferencePython();
  EXPECT_EQ(problems, "") << "schema (Draft 2020-12, Debian python3-jsonschema)";
}

TEST_F(ValidationJson, TheSchemaRejectsABadValidationSection) {
  // Control: the schema checks the section, not only its presence.
  RunResult run = *run_;
  run.validation = testing::FilledValidation(run);
  json document = BuildAuditDocument(run);
  document["validation"]["holdout"]["calibration"][0]["decile"] = 0;
  SealAuditDocument(document);
  const auto path = folder_->path() / "bad-validation.json";
  testing::WriteJsonFile(path, document);
  const std::string problems = testing::ValidateAuditAgainstSchema(path);
  if (problems == "skip") GTEST_SKIP() << "python3-jsonschema is missing";
  EXPECT_NE(problems.find("decile"), std::string::npos) << problems;
}

}  // namespace
}  // namespace stepledger
