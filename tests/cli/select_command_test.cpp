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
}

// Criterion cv runs from the quick form: 13 rows make at most 10 folds (default), each fold's
// training fit has rows enough for every Hald model.
TEST_F(SelectHald, CrossValidatedCriterionRunsFromTheQuickForm) {
  CliRun run = RunSelect({"select", data_, "--response", "y", "--criterion", "cv", "--json"});
  ASSERT_EQ(run.status, 0) << run.err;
  EXPECT_NE(run.out.find("\"folds\""), std::string::npos) << run.out;
}

// --- The quick form's candidate terms (issue: an identifier column became a 1,999-level term).

// Invented data: price depends on size; `listing` is an identifier in text form (every value
// distinct), `model_code` a categorical column of `levels` levels, each on two rows.
std::string ListingsCsv(int levels) {
  std::ostringstream csv;
  csv << "listing,model_code,size,price\n";
  for (int row = 0; row < 2 * levels; ++row) {
    const int size = 10 + (row * 7) % 23;
    csv << "L" << 10000 + row << ",M" << row % levels << "," << size << ","
        << 100 + 3 * size + (row % 5) << "\n";
  }
  return csv.str();
}

TEST(SelectQuickForm, OnTheDemoDataTheListingIdIsNotATermAndTheNoteSaysWhy) {
  const std::string data = (testing::SourceDir() / "examples" / "data" / "laptops.csv").string();
  const CliRun json_run = RunSelect({"select", data, "--response", "resale_price", "--json"});
  ASSERT_EQ(json_run.status, 0) << json_run.err;
  const auto json = nlohmann::json::parse(json_run.out);
  ASSERT_EQ(json["columns_left_out"].size(), 1u) << json["columns_left_out"].dump();
  EXPECT_EQ(json["columns_left_out"][0]["column"], "listing_id");
  EXPECT_NE(json["columns_left_out"][0]["reason"].get<std::string>().find("identifier"), std::string::npos);
  for (const auto& step : json["steps"]) {
    for (const auto& candidate : step["candidates"]) EXPECT_NE(candidate["term"], "listing_id");
  }
  const CliRun text = RunSelect({"select", data, "--response", "resale_price"});
  ASSERT_EQ(text.status, 0) << text.err;
  EXPECT_NE(text.out.find("left out of the candidate terms"), std::string::npos) << text.out;
  // 2,000 distinct listing numbers: past the levels limit (1,000 kept per column).
  EXPECT_NE(text.out.find("  - listing_id: more than 1,000 distinct levels: looks like an identifier or free text"),
            std::string::npos)
      << text.out;
}

TEST(SelectQuickForm, LeavesACategoricalOverTheLevelLimitOutAndSaysHowToRaiseIt) {
  testing::TempDir folder;
  const std::string data = folder.Write("listings.csv", ListingsCsv(120)).string();
  const CliRun run = RunSelect({"select", data, "--response", "price", "--json"});
  ASSERT_EQ(run.status, 0) << run.err;
  const auto json = nlohmann::json::parse(run.out);
  ASSERT_EQ(json["columns_left_out"].size(), 2u) << json["columns_left_out"].dump();
  EXPECT_EQ(json["columns_left_out"][0]["column"], "listing");
  EXPECT_EQ(json["columns_left_out"][1]["column"], "model_code");
  EXPECT_NE(json["columns_left_out"][1]["reason"].get<std::string>().find("more than max_levels (100)"),
            std::string::npos)
      << json["columns_left_out"].dump();
  EXPECT_EQ(json["model"]["terms"], nlohmann::json({"size"}));
}

TEST(SelectPlan, RefusesAnExplicitCategoricalOverMaxLevelsAndNamesTheKeyToRaise) {
  testing::TempDir folder;
  const std::string data = folder.Write("listings.csv", ListingsCsv(120)).string();
  const std::string plan = folder.Write("plan.json", R"({"response": "price", "method": "none",
      "terms": [{"name": "model", "categorical": "model_code"}, {"name": "size", "column": "size"}]})").string();
  CliRun run = RunSelect({"select", data, "--plan", plan});
  EXPECT_EQ(run.status, 2);
  ASSERT_EQ(run.ErrLines().size(), 1u) << run.err;
  EXPECT_NE(run.err.find("terms[0].categorical"), std::string::npos) << run.err;
  EXPECT_NE(run.err.find("120 levels, more than max_levels (100)"), std::string::npos) << run.err;
  EXPECT_NE(run.err.find("raise \"max_levels\""), std::string::npos) << run.err;

  const std::string raised = folder.Write("raised.json", R"({"response": "price", "method": "none",
      "max_levels": 150,
      "terms": [{"name": "model", "categorical": "model_code"}, {"name": "size", "column": "size"}]})").string();
  run = RunSelect({"select", data, "--plan", raised, "--json"});
  ASSERT_EQ(run.status, 0) << run.err;
  EXPECT_EQ(nlohmann::json::parse(run.out)["model"]["k"], 121);  // intercept, 119 levels, size

  const std::string too_small = folder.Write("small.json", R"({"response": "price", "terms": "all",
      "max_levels": 1})").string();
  run = RunSelect({"select", data, "--plan", too_small});
  EXPECT_EQ(run.status, 2);
  EXPECT_NE(run.err.find("plan key 'max_levels': expected an integer >= 2, found 1"), std::string::npos) << run.err;
}

// --- Options: any case for --method and --criterion; options select ignores are refused.

TEST_F(SelectHald, MethodAndCriterionTakeAnyCase) {
  const CliRun run = RunSelect({"select", data_, "--response", "y", "--method", "Forward", "--criterion", "AIC",
                                "--json"});
  ASSERT_EQ(run.status, 0) << run.err;
  const auto json = nlohmann::json::parse(run.out);
  EXPECT_EQ(json["search"]["method"], "forward") << json["search"].dump();
  EXPECT_EQ(json["search"]["criterion"], "aic") << json["search"].dump();
}

TEST_F(SelectHald, SignKeyAndForceNeedOut) {
  const std::string key = folder_.Write("key.pem", "not a key").string();
  CliRun run = RunSelect({"select", data_, "--response", "y", "--sign-key", key});
  EXPECT_EQ(run.status, 2);
  EXPECT_NE(run.err.find("--out"), std::string::npos) << run.err;
  run = RunSelect({"select", data_, "--response", "y", "--force"});
  EXPECT_EQ(run.status, 2);
  EXPECT_NE(run.err.find("--out"), std::string::npos) << run.err;
}

TEST_F(SelectHald, OutSaysWhatItWroteAndStatesTheModelInWords) {
  const auto out_dir = folder_.path() / "review";
  const CliRun run = RunSelect({"select", data_, "--plan", plan_, "--out", out_dir.string()});
  ASSERT_EQ(run.status, 0) << run.err;
  EXPECT_NE(run.out.find("Wrote " + (out_dir / "audit.json").string() + " (the audit) and " +
                         (out_dir / "report.html").string() + " (the reviewer's report)"),
            std::string::npos)
      << run.out;
  EXPECT_NE(run.out.find("Final model: y explained by x1, x2\n"), std::string::npos) << run.out;
  EXPECT_EQ(run.out.find(" ~ "), std::string::npos) << "no tilde formula";
}

}  // namespace
}  // namespace stepledger
