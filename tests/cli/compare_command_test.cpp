// `stepledger compare A B`: three verdicts (same model: exit 0; same terms, refitted
// coefficients: exit 1; different terms: exit 1), plan differences, columns that really moved,
// coefficient changes marked beyond 2 SE, the old model priced on new rows as predict prices
// them, and 2 for unreadable input. Invented data (audit_test_data.h; true model known).

#include <gtest/gtest.h>

#include <cmath>
#include <sstream>
#include <string>
#include <vector>

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
  EXPECT_EQ(run.out.rfind("Verdict: same model", 0), 0u) << run.out;
  EXPECT_NE(run.out.find("plan: the same"), std::string::npos) << run.out;
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
  EXPECT_EQ(result["verdict"], "different terms");
  EXPECT_EQ(comparison["verdict"], "different terms");
  // The plans differ in their method only.
  ASSERT_EQ(comparison["plan"]["differences"].size(), 1u) << comparison["plan"].dump(2);
  EXPECT_EQ(comparison["plan"]["differences"][0], json({{"key", "method"}, {"old", "stepwise"}, {"new", "none"}}));
  const auto text = RunStepledger({"compare", a.string(), b.string()});
  EXPECT_EQ(text.out.rfind("Verdict: different terms", 0), 0u) << text.out;
  EXPECT_NE(text.out.find("    method: stepwise -> none\n"), std::string::npos) << text.out;

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

// The same plan (method none: every term) on data whose price lost ram's effect and nothing
// else: the same rows of x, so only price moves, only ram's coefficient moves (by 12, many
// SEs), and age's estimate is unchanged to rounding (the fit is linear in y).
TEST(CompareCommand, SameTermsRefittedIsItsOwnVerdictWithMarkedCoefficientsAndOnlyMovedColumns) {
  testing::TempDir dir;
  testing::LaptopDataOptions drift;
  drift.ram_effect = 0;
  std::string drifted = testing::LaptopCsv(drift);
  // One cell of age_months nudged by a month: a shift far below 0.1 SD, not a move.
  const std::size_t first_row = drifted.find('\n') + 1;
  const std::size_t comma = drifted.find(',', first_row);
  const int age = std::stoi(drifted.substr(first_row, comma - first_row));
  drifted.replace(first_row, comma - first_row, std::to_string(age == 60 ? 59 : age + 1));
  const auto old_data = dir.Write("old.csv", testing::LaptopCsv());
  const auto new_data = dir.Write("new.csv", drifted);
  const auto a = testing::WriteAuditWithLibrary(old_data, testing::LaptopPlan("none", "bic"), dir.path() / "a");
  const auto b = testing::WriteAuditWithLibrary(new_data, testing::LaptopPlan("none", "bic"), dir.path() / "b");

  const auto run = RunStepledger({"compare", a.string(), b.string(), "--json"});
  EXPECT_EQ(run.status, 1) << run.out << run.err;
  const json comparison = json::parse(run.out)["comparison"];
  EXPECT_EQ(comparison["verdict"], "same terms, refitted coefficients");
  EXPECT_TRUE(comparison["plan"]["same"].get<bool>());
  ASSERT_EQ(comparison["columns"]["moved"].size(), 1u) << comparison["columns"].dump(2);
  EXPECT_EQ(comparison["columns"]["moved"][0]["column"], "price");
  EXPECT_NE(comparison["columns"]["moved_rule"].get<std::string>().find("0.1 old standard deviations"),
            std::string::npos);
  bool ram_seen = false, screen_seen = false;
  for (const json& entry : comparison["coefficients"]) {
    if (entry["name"] == "ram") {
      ram_seen = true;
      EXPECT_TRUE(entry["beyond_mark"].get<bool>()) << entry.dump();
    }
    if (entry["name"] == "screen") {
      screen_seen = true;
      EXPECT_FALSE(entry["beyond_mark"].get<bool>()) << entry.dump();
    }
  }
  EXPECT_TRUE(ram_seen && screen_seen);

  const auto text = RunStepledger({"compare", a.string(), b.string()});
  EXPECT_EQ(text.status, 1);
  EXPECT_EQ(text.out.rfind("Verdict: same terms, refitted coefficients", 0), 0u) << text.out;
  EXPECT_NE(text.out.find("* beyond 2 SE"), std::string::npos) << text.out;
  EXPECT_EQ(text.out.find("age_months: mean"), std::string::npos) << "a one-month nudge is not a move";
}

TEST(CompareCommand, PlanDifferencesNameTheCriterionAndThresholds) {
  testing::TempDir dir;
  const auto data = dir.Write("laptops.csv", testing::LaptopCsv());
  json plan_b = json::parse(testing::LaptopPlan("stepwise", "partial-f"));
  plan_b["entry_p"] = 0.01;
  plan_b["exit_p"] = 0.02;
  const auto a = testing::WriteAuditWithLibrary(data, testing::LaptopPlan("stepwise", "bic"), dir.path() / "a");
  const auto b = testing::WriteAuditWithLibrary(data, plan_b.dump(), dir.path() / "b");
  const auto run = RunStepledger({"compare", a.string(), b.string(), "--json"});
  const json differences = json::parse(run.out)["comparison"]["plan"]["differences"];
  std::vector<std::string> keys;
  for (const json& entry : differences) keys.push_back(entry["key"]);
  EXPECT_EQ(keys, (std::vector<std::string>{"criterion", "entry_p", "exit_p"})) << differences.dump();
}

// compare --data prices A's model through predict's path: a row with a level A never saw is
// not priced, and counted (the old loop priced it at the baseline).
TEST(CompareCommand, DataRowsWithAnUnseenLevelAreNotPricedButCounted) {
  testing::TempDir dir;
  const std::string text = testing::LaptopCsv();
  const auto data = dir.Write("laptops.csv", text);
  std::string with_unseen = text;
  int replaced = 0;
  for (std::size_t at = with_unseen.find(",A,"); at != std::string::npos && replaced < 5;
       at = with_unseen.find(",A,", at + 3)) {
    with_unseen.replace(at, 3, ",Z,");
    ++replaced;
  }
  ASSERT_EQ(replaced, 5);
  const auto new_data = dir.Write("unseen.csv", with_unseen);
  const auto a = testing::WriteAuditWithLibrary(data, testing::LaptopPlan("none", "bic"), dir.path() / "a");
  const auto run = RunStepledger({"compare", a.string(), a.string(), "--data", new_data.string(), "--json"});
  EXPECT_EQ(run.status, 0) << run.err;
  const json prediction = json::parse(run.out)["comparison"]["prediction"];
  ASSERT_TRUE(prediction["available"].get<bool>()) << prediction.dump();
  EXPECT_EQ(prediction["rows_read"], 200);
  EXPECT_EQ(prediction["rows"], 195);
  EXPECT_EQ(prediction["not_priced"]["unknown-level"], 5);

  // The same numbers as predict's own prices of those rows.
  const auto priced = RunStepledger({"predict", a.string(), new_data.string(), "--json"});
  ASSERT_EQ(priced.status, 0) << priced.err;
  const json rows = json::parse(priced.out)["rows"];
  std::istringstream lines(with_unseen);
  std::string line;
  std::getline(lines, line);
  double squares = 0;
  int count = 0;
  for (std::size_t i = 0; std::getline(lines, line); ++i) {
    if (rows[i]["prediction"].is_null()) continue;
    const double price = std::stod(line.substr(line.rfind(',') + 1));
    squares += std::pow(price - rows[i]["prediction"].get<double>(), 2);
    ++count;
  }
  ASSERT_EQ(count, 195);
  EXPECT_NEAR(prediction["old_model_rmse"].get<double>(), std::sqrt(squares / count), 1e-9 * 25)
      << "RMSE recomputed from predict's output (common practice: sqrt of the mean squared error)";
}

TEST(CompareCommand, OffersOnlyTheOptionsItUses) {
  testing::TempDir dir;
  const auto data = dir.Write("laptops.csv", testing::LaptopCsv());
  const auto a = testing::WriteAuditWithLibrary(data, testing::LaptopPlan(), dir.path() / "a");
  for (const std::vector<std::string>& extra :
       {std::vector<std::string>{"--threads", "2"}, {"--force"}, {"--delimiter", ";"}}) {
    std::vector<std::string> args = {"compare", a.string(), a.string()};
    args.insert(args.end(), extra.begin(), extra.end());
    const auto run = RunStepledger(args);
    EXPECT_EQ(run.status, 2) << extra[0];
    EXPECT_NE(run.err.find(extra[0]), std::string::npos) << run.err;
  }
  const auto help = RunStepledger({"compare", "--help"});
  EXPECT_NE(help.out.find("same terms, refitted coefficients  1"), std::string::npos) << help.out;
}

}  // namespace
}  // namespace stepledger
