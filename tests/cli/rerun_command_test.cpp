// `stepledger rerun`: the recorded plan on new data, a new audit linked to its parent, and a
// comparison that names what changed. Invented data with a known drift: ram_gb's effect removed
// and a column warranty_months added.

#include <gtest/gtest.h>

#include "stepledger/audit/audit_document.h"
#include "support/audit_test_data.h"
#include "support/cli_run.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using nlohmann::json;
using testing::RunStepledger;

class RerunCommand : public ::testing::Test {
 protected:
  void SetUp() override {
    old_data_ = dir_.Write("q3.csv", testing::LaptopCsv());
    testing::LaptopDataOptions drift;
    drift.seed = 20270301;
    drift.ram_effect = 0;
    drift.add_warranty_column = true;
    new_data_ = dir_.Write("q4.csv", testing::LaptopCsv(drift));
    parent_ = testing::WriteAuditWithLibrary(old_data_, testing::LaptopPlan(), dir_.path() / "q3");
  }
  testing::TempDir dir_;
  std::filesystem::path old_data_, new_data_, parent_;
};

TEST_F(RerunCommand, ALinkedAuditNamesTheDrift) {
  const auto out = dir_.path() / "q4";
  const auto run = RunStepledger({"rerun", parent_.string(), new_data_.string(), "--out", out.string()});
  ASSERT_EQ(run.status, 0) << run.out << run.err;
  const json parent = testing::ReadJsonFile(parent_);
  const json audit = testing::ReadJsonFile(out / "audit.json");
  EXPECT_EQ(audit["parent"]["seal"], parent["seal"]);
  EXPECT_EQ(audit["parent"]["data_sha256"], parent["data"]["sha256"]);
  const json& comparison = audit["comparison"];
  EXPECT_EQ(comparison["columns"]["added"], json::array({"warranty_months"}));
  EXPECT_EQ(comparison["columns"]["lost"], json::array());
  EXPECT_EQ(comparison["final_terms"]["left"], json::array({"ram"})) << comparison.dump(2);
  EXPECT_EQ(comparison["final_terms"]["entered"], json::array());
  EXPECT_FALSE(comparison["route"]["same"].get<bool>());
  EXPECT_TRUE(comparison["models_differ"].get<bool>());
  // The old model still prices with ram's effect: on the new rows it errs by about 12 * the
  // spread of ram_gb, far above the new model's noise level (sd 25).
  ASSERT_TRUE(comparison["prediction"]["available"].get<bool>()) << comparison["prediction"].dump();
  EXPECT_GT(comparison["prediction"]["old_model_rmse"].get<double>(),
            2 * comparison["prediction"]["new_model_rmse"].get<double>());
  EXPECT_NEAR(comparison["prediction"]["new_model_rmse"].get<double>(), 25.0, 5.0)
      << "the noise sd of the invented data";
  // Coefficients present in both models are compared in units of their standard errors.
  bool age_seen = false;
  for (const json& entry : comparison["coefficients"]) {
    if (entry["name"] == "age") {
      age_seen = true;
      EXPECT_TRUE(entry["change_in_old_se"].is_number());
    }
  }
  EXPECT_TRUE(age_seen);
  // The verdict, first; the report beside the audit, and both paths said.
  EXPECT_EQ(comparison["verdict"], "different terms");
  EXPECT_EQ(run.out.rfind("Verdict: different terms", 0), 0u) << run.out;
  const std::string report = testing::ReadText(out / "report.html");
  EXPECT_NE(report.find("<svg"), std::string::npos) << "the reviewer's report with its charts";
  EXPECT_NE(run.out.find("Wrote " + (out / "audit.json").string() + " (the new audit, linked to its parent) and " +
                         (out / "report.html").string()),
            std::string::npos)
      << run.out;
  // The terminal names both changes.
  EXPECT_NE(run.out.find("columns added: warranty_months"), std::string::npos) << run.out;
  EXPECT_NE(run.out.find("terms left the final model: ram"), std::string::npos) << run.out;
  EXPECT_NE(run.out.find("old model on the new rows: RMSE"), std::string::npos) << run.out;

  // The new audit verifies (with its data), and the schema accepts it.
  const auto verify = RunStepledger({"verify", (out / "audit.json").string(), "--data", new_data_.string()});
  EXPECT_EQ(verify.status, 0) << verify.out << verify.err;
  const std::string problems = testing::ValidateAuditAgainstSchema(out / "audit.json");
  if (problems != "skip") {
    EXPECT_EQ(problems, "") << "schema (Debian python3-jsonschema)";
  }

  // compare A B gives the same comparison and exits 1 because the final models differ.
  const auto compare = RunStepledger({"compare", parent_.string(), (out / "audit.json").string()});
  EXPECT_EQ(compare.status, 1) << compare.out << compare.err;
  EXPECT_NE(compare.out.find("terms left the final model: ram"), std::string::npos) << compare.out;
  EXPECT_NE(compare.out.find("columns added: warranty_months"), std::string::npos) << compare.out;
  EXPECT_NE(compare.out.find("old model on the new rows: RMSE"), std::string::npos)
      << "taken from the rerun's recorded comparison";
}

TEST_F(RerunCommand, RefusesToOverwriteWithoutForceAndLeavesTheFolderAsItWas) {
  const auto out = dir_.path() / "q4";
  ASSERT_EQ(RunStepledger({"rerun", parent_.string(), new_data_.string(), "--out", out.string()}).status, 0);
  const std::string before = testing::ReadText(out / "audit.json");
  auto run = RunStepledger({"rerun", parent_.string(), new_data_.string(), "--out", out.string()});
  EXPECT_EQ(run.status, 2);
  EXPECT_NE(run.err.find("audit.json: file exists; use --force to overwrite"), std::string::npos) << run.err;
  EXPECT_EQ(run.ErrLines().size(), 1u);
  EXPECT_EQ(testing::ReadText(out / "audit.json"), before);
  EXPECT_EQ(std::distance(std::filesystem::directory_iterator(out), std::filesystem::directory_iterator()), 2)
      << "audit.json and report.html";
  run = RunStepledger({"rerun", parent_.string(), new_data_.string(), "--out", out.string(), "--force"});
  EXPECT_EQ(run.status, 0) << run.err;
}

TEST_F(RerunCommand, AnOutputFolderUnderAFileGivesAClearError) {
  const auto blocker = dir_.Write("blocker", "x");
  const auto run = RunStepledger({"rerun", parent_.string(), new_data_.string(), "--out", (blocker / "q4").string()});
  EXPECT_EQ(run.status, 2);
  EXPECT_NE(run.err.find("cannot create the output folder"), std::string::npos) << run.err;
  EXPECT_EQ(testing::ReadText(blocker), "x");
}

TEST_F(RerunCommand, RefusesATamperedParent) {
  json parent = testing::ReadJsonFile(parent_);
  parent["model"]["coefficients"][1]["estimate"] = 0.0;
  const auto tampered = dir_.path() / "tampered.json";
  testing::WriteJsonFile(tampered, parent);
  const auto run = RunStepledger({"rerun", tampered.string(), new_data_.string(), "--out", (dir_.path() / "x").string()});
  EXPECT_EQ(run.status, 2);
  EXPECT_NE(run.err.find("the parent audit does not verify (key 'model'"), std::string::npos) << run.err;
  EXPECT_FALSE(std::filesystem::exists(dir_.path() / "x"));
}

TEST_F(RerunCommand, SignsWithTheGivenKey) {
  const auto key = dir_.path() / "key.pem", public_key = dir_.path() / "key.pub";
  if (!testing::MakeEd25519KeyPair(key, public_key)) GTEST_SKIP() << "openssl cannot make Ed25519 keys here";
  const auto out = dir_.path() / "signed";
  ASSERT_EQ(RunStepledger({"rerun", parent_.string(), new_data_.string(), "--out", out.string(), "--sign-key",
                           key.string()})
                .status,
            0);
  const auto run = RunStepledger({"verify", (out / "audit.json").string(), "--public-key", public_key.string()});
  EXPECT_EQ(run.status, 0) << run.out << run.err;
  // The new audit's signature is the JWS of format_version 4, with the key as a JWK.
  const nlohmann::json written = testing::ReadJsonFile(out / "audit.json");
  EXPECT_EQ(written["format_version"], kAuditFormatVersion);
  EXPECT_TRUE(written["signature"]["jws"].is_string()) << written["signature"].dump();
  EXPECT_EQ(written["signature"]["jwk"]["kty"], "OKP");
}

}  // namespace
}  // namespace stepledger
