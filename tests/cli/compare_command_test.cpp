// `stepledger compare A B`: exit 1 when the final models differ, 0 when they are the same,
// 2 for unreadable input.

#include <gtest/gtest.h>

#include "stepledger/audit/audit_document.h"
#include "support/audit_test_data.h"
#include "support/cli_run.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using nlohmann::json;
using testing::RunStepledger;

TEST(CompareCommand, TheSameRunTwiceIsTheSameModel) {
  testing::TempDir dir;
  const auto data = dir.Write("laptops.csv", testing::LaptopCsv());
  const auto a = testing::WriteAuditWithLibrary(data, testing::LaptopPlan(), dir.path() / "a");
  const auto b = testing::WriteAuditWithLibrary(data, testing::LaptopPlan(), dir.path() / "b");
  const auto run = RunStepledger({"compare", a.string(), b.string()});
  EXPECT_EQ(run.status, 0) << run.out << run.err;
  EXPECT_NE(run.out.find("route: the same actions and terms at every step"), std::string::npos) << run.out;
  EXPECT_NE(run.out.find("The final models are the same."), std::string::npos) << run.out;
}

TEST(CompareCommand, ADifferentPlanGivesADifferentModelAndExitOne) {
  testing::TempDir dir;
  const auto data = dir.Write("laptops.csv", testing::LaptopCsv());
  const auto a = testing::WriteAuditWithLibrary(data, testing::LaptopPlan("stepwise", "bic"), dir.path() / "a");
  const auto b = testing::WriteAuditWithLibrary(data, testing::LaptopPlan("none", "bic"), dir.path() / "b");
  const auto run = RunStepledger({"compare", a.string(), b.string(), "--json"});
  EXPECT_EQ(run.status, 1) << run.out << run.err;
  const json result = json::parse(run.out);
  const json& comparison = result["comparison"];
  // `none` keeps every term: the two no-effect terms of the invented data enter.
  EXPECT_EQ(comparison["final_terms"]["entered"], json::array({"battery", "screen"})) << comparison.dump(2);
  EXPECT_EQ(comparison["final_terms"]["left"], json::array());
  EXPECT_TRUE(comparison["same_data"].get<bool>());
  EXPECT_FALSE(comparison["route"]["same"].get<bool>());
  EXPECT_FALSE(comparison["prediction"]["available"].get<bool>());

  // With B's data, A's model is evaluated on B's rows: the same rows, so A's error is its RMSE.
  const auto with_data = RunStepledger({"compare", a.string(), b.string(), "--data", data.string(), "--json"});
  const json predicted = json::parse(with_data.out)["comparison"]["prediction"];
  ASSERT_TRUE(predicted["available"].get<bool>()) << predicted.dump();
  const json a_model = testing::ReadJsonFile(a)["model"];
  EXPECT_NEAR(predicted["old_model_rmse"].get<double>(),
              std::sqrt(a_model["rss"].get<double>() / a_model["n"].get<double>()), 1e-9 * 25)
      << "A's in-sample RMSE, recomputed from its RSS (common practice: RMSE = sqrt(RSS/n))";
}

TEST(CompareCommand, UnreadableInputExitsTwo) {
  testing::TempDir dir;
  const auto junk = dir.Write("junk.json", "[1, 2");
  const auto run = RunStepledger({"compare", junk.string(), junk.string()});
  EXPECT_EQ(run.status, 2);
  EXPECT_NE(run.err.find("junk.json:1:"), std::string::npos) << run.err;
}

TEST(CompareCommand, WarnsWhenAnAuditDoesNotVerify) {
  testing::TempDir dir;
  const auto data = dir.Write("laptops.csv", testing::LaptopCsv());
  const auto a = testing::WriteAuditWithLibrary(data, testing::LaptopPlan(), dir.path() / "a");
  json edited = testing::ReadJsonFile(a);
  edited["model"]["coefficients"][1]["estimate"] = 0.0;
  const auto b = dir.path() / "edited.json";
  testing::WriteJsonFile(b, edited);
  const auto run = RunStepledger({"compare", a.string(), b.string()});
  EXPECT_EQ(run.status, 1);
  EXPECT_NE(run.out.find("Warning: " + b.string() + " does not verify: key 'model'"), std::string::npos) << run.out;
}

}  // namespace
}  // namespace stepledger
