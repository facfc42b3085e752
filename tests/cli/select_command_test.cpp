// `stepledger select`, run in-process on the Hald cement data (reference folder) and on
// small invented files.

#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>

#include <nlohmann/json.hpp>

#include "stepledger/cli/run_cli.h"
#include "support/cli_run.h"
#include "support/selection_fixtures.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using testing::CliRun;

CliRun RunSelect(const std::vector<std::string>& args) { return testing::RunStepledger(args); }

class SelectHald : public ::testing::Test {
 protected:
  void SetUp() override {
    // The project's copy of the Hald cement data (tests/reference); missing fails, never skips.
    data_ = (testing::ReferenceDir() / "hald-cement" / "hald.csv").string();
    plan_ = folder_.Write("hald.json",
                          R"({"response": "y", "terms": "all", "method": "stepwise",
                              "criterion": "partial-f", "entry_p": 0.10, "exit_p": 0.10})")
                .string();
  }
  testing::TempDir folder_;
  std::string data_, plan_;
};

// Source: Hald (1952) via Draper and Smith; R^2 of {x1, x2} = 0.97868 (reference README,
// exact rational refit), printed to four places as 0.9787.
TEST_F(SelectHald, PlanRunPrintsTheRouteTheFinalModelAndTheCautions) {
  const CliRun run = RunSelect({"select", data_, "--plan", plan_});
  ASSERT_EQ(run.status, 0) << run.err;
  EXPECT_NE(run.out.find("remove  x4"), std::string::npos) << run.out;
  EXPECT_NE(run.out.find("0.9786"), std::string::npos) << run.out;  // R^2 0.97867837 -> 0.9787
  EXPECT_NE(run.out.find("optimistic"), std::string::npos);
  EXPECT_NE(run.out.find("Largest VIF in the final model"), std::string::npos) << run.out;  // the run's one caution list
  EXPECT_NE(run.out.find("protected characteristics"), std::string::npos);
  EXPECT_EQ(run.err, "");  // no progress line: stderr is not a terminal here
}

TEST_F(SelectHald, JsonHasStepsModelAndNoSubsetsForStepwise) {
  const CliRun run = RunSelect({"select", data_, "--plan", plan_, "--json"});
  ASSERT_EQ(run.status, 0) << run.err;
  const auto json = nlohmann::json::parse(run.out);
  EXPECT_NEAR(json["model"]["r2"].get<double>(), 0.97867837, 1e-8);
  EXPECT_EQ(json["model"]["terms"], nlohmann::json({"x1", "x2"}));
  ASSERT_EQ(json["steps"].size(), 6u);
  EXPECT_EQ(json["steps"][0]["action"], "start");
  EXPECT_EQ(json["steps"][4]["action"], "remove");
  EXPECT_EQ(json["steps"][4]["term"], "x4");
  EXPECT_EQ(json["steps"][5]["action"], "stop");
  EXPECT_FALSE(json.contains("subsets"));
  const auto& candidate = json["steps"][1]["candidates"][0];
  for (const char* key : {"term", "action", "df", "rss", "score", "f", "p", "eligible", "reason"}) {
    EXPECT_TRUE(candidate.contains(key)) << key;
  }
}

TEST_F(SelectHald, QuickFormAllSubsetsListsSubsetsAndOutWritesTheAudit) {
  const auto out_dir = folder_.path() / "run";
  const CliRun run = RunSelect({"select", data_, "--response", "y", "--method", "all-subsets",
                          "--criterion", "bic", "--json", "--out", out_dir.string()});
  ASSERT_EQ(run.status, 0) << run.err;
  const auto json = nlohmann::json::parse(run.out);
  ASSERT_TRUE(json.contains("subsets"));
  EXPECT_EQ(json["subsets"][1]["terms"], nlohmann::json({"x4"}));  // best single term
  std::ifstream written(out_dir / "audit.json");
  ASSERT_TRUE(written.good());
  const auto audit = nlohmann::json::parse(written);
  // The audit records the same route and final model as the terminal's JSON.
  EXPECT_EQ(audit["format"], "stepledger-audit");
  EXPECT_EQ(audit["subsets"], json["subsets"]);
  EXPECT_EQ(audit["model"]["terms"], json["model"]["terms"]);
  // A second run refuses to overwrite without --force, and says how.
  const CliRun again = RunSelect({"select", data_, "--response", "y", "--out", out_dir.string()});
  EXPECT_EQ(again.status, 2);
  EXPECT_NE(again.err.find("--force"), std::string::npos) << again.err;
  EXPECT_EQ(RunSelect({"select", data_, "--response", "y", "--out", out_dir.string(), "--force"}).status, 0);
}

TEST_F(SelectHald, BadUsageExitsTwoWithOneLineNamingTheProblem) {
  CliRun run = RunSelect({"select", data_, "--response", "y", "--criterion", "r2"});
  EXPECT_EQ(run.status, 2);
  EXPECT_NE(run.err.find("--criterion"), std::string::npos) << run.err;
  run = RunSelect({"select", data_});
  EXPECT_EQ(run.status, 2);
  EXPECT_NE(run.err.find("--plan"), std::string::npos) << run.err;
  const std::string cycling = folder_.Write("cycle.json",
      R"({"response": "y", "terms": "all", "criterion": "partial-f", "entry_p": 0.3, "exit_p": 0.1})").string();
  run = RunSelect({"select", data_, "--plan", cycling});
  EXPECT_EQ(run.status, 2);
  EXPECT_NE(run.err.find("entry_p"), std::string::npos) << run.err;
  EXPECT_NE(run.err.find("exit_p"), std::string::npos) << run.err;
  run = RunSelect({"select", data_, "--response", "y", "--criterion", "cv"});
  EXPECT_EQ(run.status, 2);
  EXPECT_NE(run.err.find("not available yet"), std::string::npos) << run.err;
}

}  // namespace
}  // namespace stepledger
