// `stepledger fit`, run in-process: the report, the JSON contract, exit statuses and
// one-line errors naming the place.

#include <gtest/gtest.h>

#include <cmath>
#include <cstdint>
#include <sstream>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "support/cli_run.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using testing::CliRun;
using testing::RunStepledger;
using testing::TempDir;

// y against x = 1..6; the closed-form simple regression below gives the expected values
// (common practice: b1 = Sxy / Sxx, b0 = ybar - b1 xbar).
constexpr const char* kLineCsv = "x,y\n1,3.1\n2,4.9\n3,7.2\n4,8.8\n5,11.1\n6,12.9\n";
constexpr const char* kLinePlan = R"({"response": "y", "terms": [{"name": "x", "column": "x"}]})";

struct Files {
  TempDir folder;
  std::string data, plan;
  Files(const std::string& csv, const std::string& plan_text) {
    data = folder.Write("data.csv", csv).string();
    plan = folder.Write("plan.json", plan_text).string();
  }
};

TEST(FitCommand, PrintsTheCoefficientTableAndRowAccounting) {
  Files files(kLineCsv, kLinePlan);
  const CliRun run = RunStepledger({"fit", files.data, "--plan", files.plan});
  ASSERT_EQ(run.status, 0) << run.err;
  EXPECT_NE(run.out.find("Coefficients"), std::string::npos) << run.out;
  EXPECT_NE(run.out.find("intercept"), std::string::npos);
  EXPECT_NE(run.out.find("Rows: 6 read, 6 used, 0 dropped"), std::string::npos) << run.out;
  EXPECT_NE(run.out.find("largest leverage"), std::string::npos);
  EXPECT_NE(run.out.find("PRESS"), std::string::npos);
  EXPECT_NE(run.out.find("association in these data, not a cause"), std::string::npos);
  EXPECT_NE(run.out.find("extrapolations"), std::string::npos);
  // Slope 34.6 / 17.5 = 1.977142857... (closed form, common practice).
  EXPECT_NE(run.out.find("1.977142"), std::string::npos) << run.out;
}

// The model in words, with the response's transform and the weights (never a tilde formula).
TEST(FitCommand, StatesTheModelWithItsTransformAndWeights) {
  Files files("x,z,w,y\n1,0.5,1,3.1\n2,0.1,2,4.9\n3,0.7,1,7.2\n4,0.2,3,8.8\n5,0.9,1,11.1\n6,0.4,2,12.9\n",
              R"({"response": "y", "response_transform": "log", "weights": "w",
                  "terms": [{"name": "x", "column": "x"}, {"name": "z", "column": "z"}]})");
  const CliRun run = RunStepledger({"fit", files.data, "--plan", files.plan});
  ASSERT_EQ(run.status, 0) << run.err;
  EXPECT_EQ(run.out.rfind("Model: log(y) explained by x, z, weighted by w\n", 0), 0u) << run.out;
  EXPECT_EQ(run.out.find(" ~ "), std::string::npos) << run.out;
  const CliRun json = RunStepledger({"fit", files.data, "--plan", files.plan, "--json"});
  EXPECT_EQ(nlohmann::json::parse(json.out)["model_statement"], "log(y) explained by x, z, weighted by w");
}

// fit writes no file: --force is not offered.
TEST(FitCommand, OffersNoForceOption) {
  Files files(kLineCsv, kLinePlan);
  const CliRun run = RunStepledger({"fit", files.data, "--plan", files.plan, "--force"});
  EXPECT_EQ(run.status, 2);
  EXPECT_NE(run.err.find("--force"), std::string::npos) << run.err;
}

TEST(FitCommand, QuietLeavesOutDiagnosticsAndCautions) {
  Files files(kLineCsv, kLinePlan);
  const CliRun run = RunStepledger({"fit", files.data, "--plan", files.plan, "--quiet"});
  ASSERT_EQ(run.status, 0) << run.err;
  EXPECT_NE(run.out.find("Coefficients"), std::string::npos);
  EXPECT_EQ(run.out.find("Cautions"), std::string::npos);
}

TEST(FitCommand, JsonHasEveryContractKeyAndNothingElseOnStdout) {
  Files files(kLineCsv, kLinePlan);
  const CliRun run = RunStepledger({"fit", files.data, "--plan", files.plan, "--json"});
  ASSERT_EQ(run.status, 0) << run.err;
  nlohmann::json model;
  ASSERT_NO_THROW(model = nlohmann::json::parse(run.out)) << run.out;  // the whole stdout
  for (const char* key : {"terms", "n", "k", "rss", "tss", "r2", "adj_r2", "sigma",
                          "log_likelihood", "aic", "aicc", "bic", "f", "f_p", "coefficients",
                          "anova"}) {
    EXPECT_TRUE(model.contains(key)) << "missing contract key " << key;
  }
  EXPECT_TRUE(model["anova"].is_object());
  ASSERT_EQ(model["coefficients"].size(), 2u);
  for (const auto& coefficient : model["coefficients"]) {
    for (const char* key : {"name", "term", "estimate", "se", "t", "p", "ci_low", "ci_high", "vif"}) {
      EXPECT_TRUE(coefficient.contains(key)) << "coefficient lacks " << key;
    }
  }
  EXPECT_EQ(model["coefficients"][0]["name"], "intercept");
  EXPECT_EQ(model["terms"], nlohmann::json::array({"x"}));
  EXPECT_EQ(model["n"], 6);
  EXPECT_EQ(model["k"], 2);
  // Closed form (common practice): xbar 3.5, ybar 8, Sxx 17.5, Sxy 34.6.
  const double slope = 34.6 / 17.5, intercept = 8.0 - 3.5 * slope;
  const double eps = 1e-13;
  EXPECT_NEAR(model["coefficients"][1]["estimate"].get<double>(), slope, eps * slope);
  EXPECT_NEAR(model["coefficients"][0]["estimate"].get<double>(), intercept, 1e-12);
  // The intercept has no VIF (JSON null, not a number); a lone predictor beside it has 1.
  EXPECT_TRUE(model["coefficients"][0]["vif"].is_null());
  EXPECT_DOUBLE_EQ(model["coefficients"][1]["vif"].get<double>(), 1.0);
  EXPECT_EQ(model["data"]["rows_read"], 6);
  EXPECT_TRUE(model["cautions"].is_array());
}

TEST(FitCommand, NamesCategoricalAndProductColumnsAsTheContractSays) {
  Files files("x,g,y\n1,a,2\n2,b,5\n3,a,4.1\n4,b,9.2\n5,c,6\n6,c,7.5\n7,a,8.2\n8,b,17\n9,c,10.1\n",
              R"({"response": "y", "terms": [{"name": "x", "column": "x"},
                  {"name": "g", "categorical": "g", "baseline": "a"},
                  {"name": "x:g", "product": ["x", "g"]}]})");
  const CliRun run = RunStepledger({"fit", files.data, "--plan", files.plan, "--json"});
  ASSERT_EQ(run.status, 0) << run.err;
  const auto model = nlohmann::json::parse(run.out);
  std::vector<std::string> names;
  for (const auto& coefficient : model["coefficients"]) names.push_back(coefficient["name"]);
  EXPECT_EQ(names, (std::vector<std::string>{"intercept", "x", "g=b", "g=c", "x:g=b", "x:g=c"}));
  EXPECT_EQ(model["coefficients"][2]["term"], "g");
}

TEST(FitCommand, CountsDroppedRowsByReason) {
  Files files("x,y\n1,3.1\n2,NA\n3,7.2\n,8.8\n5,11.1\n6,12.9\n", kLinePlan);
  const CliRun run = RunStepledger({"fit", files.data, "--plan", files.plan, "--json"});
  ASSERT_EQ(run.status, 0) << run.err;
  const auto result = nlohmann::json::parse(run.out);
  EXPECT_EQ(result["n"], 4);
  EXPECT_EQ(result["data"]["rows_read"], 6);
  EXPECT_EQ(result["data"]["rows_used"], 4);
  // One entry per reason and column, by reason then column; row 3 misses y, row 5 misses x.
  const auto expected = nlohmann::json::parse(R"([{"reason": "missing", "column": "x", "rows": 1},
                                                  {"reason": "missing", "column": "y", "rows": 1}])");
  EXPECT_EQ(result["data"]["rows_dropped"], expected) << result["data"]["rows_dropped"].dump();
}

TEST(FitCommand, RaggedCsvIsExitTwoWithOneLineNamingFileLineColumn) {
  Files files("x,y\n1,3.1\n2,4.9,0\n3,7.2\n", kLinePlan);
  const CliRun run = RunStepledger({"fit", files.data, "--plan", files.plan});
  EXPECT_EQ(run.status, 2);
  ASSERT_EQ(run.ErrLines().size(), 1u) << run.err;
  // The third field of line 3 starts at byte column 7.
  EXPECT_NE(run.err.find("data.csv:3:"), std::string::npos) << run.err;
  EXPECT_TRUE(run.out.empty()) << run.out;
}

TEST(FitCommand, BadPlanKeyIsExitTwoWithOneLineNamingTheKey) {
  Files files(kLineCsv, R"({"response": "y", "terms": [{"name": "x", "colum": "x"}]})");
  const CliRun run = RunStepledger({"fit", files.data, "--plan", files.plan});
  EXPECT_EQ(run.status, 2);
  ASSERT_EQ(run.ErrLines().size(), 1u) << run.err;
  EXPECT_NE(run.err.find("terms[0].colum"), std::string::npos) << run.err;
}

TEST(FitCommand, UnknownColumnNamesTheKey) {
  Files files(kLineCsv, R"({"response": "price", "terms": [{"name": "x", "column": "x"}]})");
  const CliRun run = RunStepledger({"fit", files.data, "--plan", files.plan});
  EXPECT_EQ(run.status, 2);
  ASSERT_EQ(run.ErrLines().size(), 1u) << run.err;
  EXPECT_NE(run.err.find("response"), std::string::npos) << run.err;
}

TEST(FitCommand, LogOfNonPositiveValueNamesTheCell) {
  Files files("x,y\n1,3.1\n0,4.9\n3,7.2\n", R"({"response": "y", "terms": [{"name": "lx", "log": "x"}]})");
  const CliRun run = RunStepledger({"fit", files.data, "--plan", files.plan});
  EXPECT_EQ(run.status, 2);
  ASSERT_EQ(run.ErrLines().size(), 1u) << run.err;
  EXPECT_NE(run.err.find("data.csv:3:1"), std::string::npos) << run.err;
}

TEST(FitCommand, MissingDataFileIsBadUsage) {
  Files files(kLineCsv, kLinePlan);
  const CliRun run = RunStepledger({"fit", files.data + ".absent", "--plan", files.plan});
  EXPECT_EQ(run.status, 2);
  ASSERT_EQ(run.ErrLines().size(), 1u) << run.err;
  EXPECT_NE(run.err.find(".absent"), std::string::npos) << run.err;
}

TEST(FitCommand, MissingPlanOptionIsBadUsage) {
  Files files(kLineCsv, kLinePlan);
  const CliRun run = RunStepledger({"fit", files.data});
  EXPECT_EQ(run.status, 2);
  ASSERT_EQ(run.ErrLines().size(), 1u) << run.err;
  EXPECT_NE(run.err.find("--plan"), std::string::npos) << run.err;
}

TEST(FitCommand, DelimiterOption) {
  Files files("x;y\n1;3.1\n2;4.9\n3;7.2\n4;8.8\n5;11.1\n6;12.9\n", kLinePlan);
  EXPECT_EQ(RunStepledger({"fit", files.data, "--plan", files.plan, "--delimiter", ";"}).status, 0);
  const CliRun bad = RunStepledger({"fit", files.data, "--plan", files.plan, "--delimiter", ";;"});
  EXPECT_EQ(bad.status, 2);
  EXPECT_NE(bad.err.find("--delimiter"), std::string::npos) << bad.err;
}

TEST(FitCommand, ThreadsGiveTheSameEstimates) {
  Files files(kLineCsv, kLinePlan);
  const CliRun one = RunStepledger({"fit", files.data, "--plan", files.plan, "--json"});
  const CliRun two = RunStepledger({"fit", files.data, "--plan", files.plan, "--json", "--threads", "2"});
  ASSERT_EQ(one.status, 0);
  ASSERT_EQ(two.status, 0) << two.err;
  const auto a = nlohmann::json::parse(one.out), b = nlohmann::json::parse(two.out);
  EXPECT_NEAR(a["coefficients"][1]["estimate"].get<double>(),
              b["coefficients"][1]["estimate"].get<double>(), 1e-13);
  EXPECT_EQ(RunStepledger({"fit", files.data, "--plan", files.plan, "--threads", "0"}).status, 2);
}

// The commands the top-level help lists (the lines under "Subcommands:").
std::vector<std::string> ListedCommands(const std::string& help) {
  std::vector<std::string> commands;
  const auto start = help.find("Subcommands:\n");
  if (start == std::string::npos) return commands;
  std::istringstream lines(help.substr(start + 13));
  for (std::string line; std::getline(lines, line);) {
    if (line.rfind("  ", 0) != 0) break;
    std::istringstream words(line);
    std::string name;
    words >> name;
    commands.push_back(name);
  }
  return commands;
}

TEST(CommandLine, HelpOfEveryCommandTeaches) {
  const CliRun top = RunStepledger({"--help"});
  EXPECT_EQ(top.status, 0);
  const std::vector<std::string> commands = ListedCommands(top.out);
  ASSERT_GE(commands.size(), 2u) << top.out;
  EXPECT_EQ(commands[0], "fit");
  EXPECT_EQ(commands[1], "profile");
  // CONTRACT.md: --help on every command, and the common options; the project's rule: a
  // description and an example line.
  for (const std::string& command : commands) {
    const CliRun run = RunStepledger({command, "--help"});
    EXPECT_EQ(run.status, 0) << command;
    EXPECT_NE(run.out.find("Usage: stepledger " + command), std::string::npos) << command << run.out;
    EXPECT_NE(run.out.find("Example"), std::string::npos) << command << " --help has no example";
    EXPECT_NE(run.out.find("--json"), std::string::npos) << command;
    EXPECT_NE(run.out.find("--log-level"), std::string::npos) << command;
  }
}

TEST(CommandLine, VersionAndBadUsage) {
  const CliRun version = RunStepledger({"--version"});
  EXPECT_EQ(version.status, 0);
  EXPECT_EQ(version.out.rfind("stepledger ", 0), 0u) << version.out;

  const CliRun none = RunStepledger({});
  EXPECT_EQ(none.status, 2);
  EXPECT_EQ(none.ErrLines().size(), 1u) << none.err;

  const CliRun unknown = RunStepledger({"fit", "--no-such-option"});
  EXPECT_EQ(unknown.status, 2);
  EXPECT_EQ(unknown.ErrLines().size(), 1u) << unknown.err;

  const CliRun level = RunStepledger({"profile", "x.csv", "--log-level", "loud"});
  EXPECT_EQ(level.status, 2);
  EXPECT_EQ(level.ErrLines().size(), 1u) << level.err;
}

}  // namespace
}  // namespace stepledger
