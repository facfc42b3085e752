// `stepledger profile`, run in-process: the column summary, the starter plan (a valid plan
// file that `fit` accepts), --plan-out's refusal to overwrite, and errors naming the option.

#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>

#include <nlohmann/json.hpp>

#include "stepledger/io/plan_file.h"
#include "support/cli_run.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using testing::CliRun;
using testing::RunStepledger;
using testing::TempDir;

// id: all distinct (left out); colour: two levels tied at 3 (baseline byte-wise: "blue");
// size: numeric; note: always missing; price: numeric with one missing cell.
constexpr const char* kShopCsv =
    "id,colour,size,note,price\n"
    "k1,red,1.5,,10\n"
    "k2,blue,2.5,NA,12\n"
    "k3,red,3.5,,NA\n"
    "k4,blue,4.5,,17\n"
    "k5,red,5.5,,19\n"
    "k6,blue,6.5,,21\n";

std::string ReadText(const std::filesystem::path& path) {
  std::ifstream in(path, std::ios::binary);
  std::ostringstream text;
  text << in.rdbuf();
  return text.str();
}

TEST(ProfileCommand, JsonSummarisesEachColumn) {
  TempDir folder;
  const auto data = folder.Write("shop.csv", kShopCsv);
  const CliRun run = RunStepledger({"profile", data.string(), "--json", "--response", "price"});
  ASSERT_EQ(run.status, 0) << run.err;
  const auto result = nlohmann::json::parse(run.out);
  EXPECT_EQ(result["rows"], 6);
  ASSERT_EQ(result["columns"].size(), 5u);
  const auto& size = result["columns"][2];
  EXPECT_EQ(size["kind"], "numeric");
  EXPECT_DOUBLE_EQ(size["min"].get<double>(), 1.5);
  EXPECT_DOUBLE_EQ(size["max"].get<double>(), 6.5);
  EXPECT_DOUBLE_EQ(size["mean"].get<double>(), 4.0);
  const auto& price = result["columns"][4];
  EXPECT_EQ(price["present"], 5);
  EXPECT_EQ(price["missing"], 1);
  EXPECT_EQ(result["columns"][1]["kind"], "categorical");
  EXPECT_EQ(result["columns"][3]["missing"], 6);
}

// The text summary is read by people: quantities with 4 significant digits and thousands
// separators, counts with separators (number_format.h; common practice).
TEST(ProfileCommand, TextSummaryFollowsTheNumberPolicy) {
  TempDir folder;
  const auto data = folder.Write("big.csv",
                                 "listing_price,grade\n"
                                 "1234567.5,A\n"
                                 "2345678.6,A\n"
                                 "0.0123456,B\n");
  const CliRun run = RunStepledger({"profile", data.string()});
  ASSERT_EQ(run.status, 0) << run.err;
  EXPECT_NE(run.out.find("range 0.01235 .. 2,345,679, mean 1,193,415"), std::string::npos) << run.out;
  EXPECT_NE(run.out.find("A (2), B (1)"), std::string::npos) << run.out;
  EXPECT_EQ(run.out.find("e+06"), std::string::npos) << run.out;
}

TEST(ProfileCommand, StarterPlanLeavesOutIdsAndEmptyColumnsAndPicksTheBaseline) {
  TempDir folder;
  const auto data = folder.Write("shop.csv", kShopCsv);
  const CliRun run = RunStepledger({"profile", data.string(), "--json", "--response", "price"});
  ASSERT_EQ(run.status, 0) << run.err;
  const auto result = nlohmann::json::parse(run.out);
  const auto& plan = result["starter_plan"];
  EXPECT_EQ(plan["response"], "price");
  ASSERT_EQ(plan["terms"].size(), 2u) << plan.dump();
  EXPECT_EQ(plan["terms"][0]["categorical"], "colour");
  // Most frequent level; blue and red tie at 3, so the byte-wise first wins (README rule).
  EXPECT_EQ(plan["terms"][0]["baseline"], "blue");
  EXPECT_EQ(plan["terms"][1]["column"], "size");
  const std::string notes = result["notes"].dump();
  EXPECT_NE(notes.find("'id' left out"), std::string::npos) << notes;
  EXPECT_NE(notes.find("'note' left out"), std::string::npos) << notes;
  // The starter plan is a valid plan file.
  EXPECT_NO_THROW(ParsePlanText(plan.dump(), "starter plan"));
}

// The response is never guessed (the first numeric column is as often an id or a count).
TEST(ProfileCommand, WithoutResponseThereIsNoStarterPlanAndTheNoteSaysHowToGetOne) {
  TempDir folder;
  const auto data = folder.Write("shop.csv", kShopCsv);
  const CliRun run = RunStepledger({"profile", data.string()});
  ASSERT_EQ(run.status, 0) << run.err;
  EXPECT_EQ(run.out.find("\"response\""), std::string::npos) << run.out;
  EXPECT_EQ(run.out.find("Starter plan"), std::string::npos) << run.out;
  EXPECT_NE(run.out.find("no starter plan: name the response (the column to explain) with --response COL"),
            std::string::npos)
      << run.out;
  EXPECT_NE(run.out.find("blue (3), red (3)"), std::string::npos) << run.out;
  const CliRun json = RunStepledger({"profile", data.string(), "--json"});
  ASSERT_EQ(json.status, 0) << json.err;
  EXPECT_TRUE(nlohmann::json::parse(json.out)["starter_plan"].is_null());
  const CliRun plan_out = RunStepledger({"profile", data.string(), "--plan-out", (folder.path() / "p.json").string()});
  EXPECT_EQ(plan_out.status, 2);
  EXPECT_NE(plan_out.err.find("--response"), std::string::npos) << plan_out.err;
}

TEST(ProfileCommand, ASemicolonFileWithoutTheResponseColumnHintsAtDelimiter) {
  TempDir folder;
  const auto data = folder.Write("shop.csv", "size;price\n1;10\n2;12\n3;15\n");
  CliRun run = RunStepledger({"profile", data.string(), "--response", "price"});
  EXPECT_EQ(run.status, 2);
  ASSERT_EQ(run.ErrLines().size(), 1u) << run.err;
  EXPECT_NE(run.err.find("no column 'price'"), std::string::npos) << run.err;
  EXPECT_NE(run.err.find("add --delimiter ';'"), std::string::npos) << run.err;
  run = RunStepledger({"profile", data.string()});
  EXPECT_EQ(run.status, 0);
  EXPECT_NE(run.out.find("add --delimiter ';'"), std::string::npos) << run.out;
  run = RunStepledger({"profile", data.string(), "--response", "price", "--delimiter", ";"});
  EXPECT_EQ(run.status, 0) << run.err;
}

TEST(ProfileCommand, ATextCellInANumericColumnSuggestsTheMissingList) {
  TempDir folder;
  std::string csv = "size,price\n";
  for (int row = 0; row < 20; ++row) csv += std::to_string(row) + "," + (row == 2 ? "n/a" : std::to_string(10 + row)) + "\n";
  const auto data = folder.Write("shop.csv", csv);
  // The cell is on line 4 (header on line 1, row 2 on line 4), byte column 3 (after "2,").
  const std::string where = data.string() + ":4:3";
  CliRun run = RunStepledger({"profile", data.string(), "--response", "size"});
  ASSERT_EQ(run.status, 0) << run.err;
  EXPECT_NE(run.out.find("column 'price' holds numbers but for 1 text cell, the first 'n/a' at " + where),
            std::string::npos)
      << run.out;
  EXPECT_NE(run.out.find("add it to the plan's \"missing\" list"), std::string::npos) << run.out;
  run = RunStepledger({"profile", data.string(), "--response", "price"});
  EXPECT_EQ(run.status, 2);
  EXPECT_NE(run.err.find("'n/a' at " + where), std::string::npos) << run.err;
  EXPECT_NE(run.err.find("\"missing\""), std::string::npos) << run.err;
}

TEST(ProfileCommand, StarterPlanFitsEndToEnd) {
  TempDir folder;
  const auto data = folder.Write("shop.csv", kShopCsv);
  const std::string plan = (folder.path() / "plan.json").string();
  const CliRun profile =
      RunStepledger({"profile", data.string(), "--response", "price", "--plan-out", plan});
  ASSERT_EQ(profile.status, 0) << profile.err;
  EXPECT_NE(profile.out.find("written to"), std::string::npos);
  const CliRun fit = RunStepledger({"fit", data.string(), "--plan", plan, "--json"});
  ASSERT_EQ(fit.status, 0) << fit.err;
  EXPECT_EQ(nlohmann::json::parse(fit.out)["n"], 5);
}

TEST(ProfileCommand, PlanOutRefusesToOverwriteWithoutForce) {
  TempDir folder;
  const auto data = folder.Write("shop.csv", kShopCsv);
  const auto plan = folder.Write("plan.json", "keep me");
  const CliRun refused =
      RunStepledger({"profile", data.string(), "--response", "price", "--plan-out", plan.string()});
  EXPECT_EQ(refused.status, 2);
  ASSERT_EQ(refused.ErrLines().size(), 1u) << refused.err;
  EXPECT_NE(refused.err.find(plan.string()), std::string::npos) << refused.err;
  EXPECT_NE(refused.err.find("--force"), std::string::npos) << refused.err;
  EXPECT_EQ(ReadText(plan), "keep me");

  const CliRun forced = RunStepledger(
      {"profile", data.string(), "--response", "price", "--plan-out", plan.string(), "--force"});
  ASSERT_EQ(forced.status, 0) << forced.err;
  EXPECT_NO_THROW(LoadPlanFile(plan));
  // No temporary file is left behind.
  int files = 0;
  for ([[maybe_unused]] const auto& entry : std::filesystem::directory_iterator(folder.path())) ++files;
  EXPECT_EQ(files, 2);
}

TEST(ProfileCommand, BadResponseNamesTheOption) {
  TempDir folder;
  const auto data = folder.Write("shop.csv", kShopCsv);
  const CliRun unknown = RunStepledger({"profile", data.string(), "--response", "cost"});
  EXPECT_EQ(unknown.status, 2);
  ASSERT_EQ(unknown.ErrLines().size(), 1u) << unknown.err;
  EXPECT_NE(unknown.err.find("--response"), std::string::npos) << unknown.err;
  EXPECT_NE(unknown.err.find("cost"), std::string::npos) << unknown.err;

  const CliRun text = RunStepledger({"profile", data.string(), "--response", "colour"});
  EXPECT_EQ(text.status, 2);
  ASSERT_EQ(text.ErrLines().size(), 1u) << text.err;
  // Names the first text cell of the column: line 2, column 4.
  EXPECT_NE(text.err.find("shop.csv:2:4"), std::string::npos) << text.err;
}

TEST(ProfileCommand, BrokenCsvNamesTheLine) {
  TempDir folder;
  const auto data = folder.Write("broken.csv", "a,b\n1,2\n3,\"4\n");
  const CliRun run = RunStepledger({"profile", data.string()});
  EXPECT_EQ(run.status, 2);
  ASSERT_EQ(run.ErrLines().size(), 1u) << run.err;
  EXPECT_NE(run.err.find("broken.csv:3:"), std::string::npos) << run.err;
}

}  // namespace
}  // namespace stepledger
