// `stepledger demo`: writes the invented scenario and runs `select` on it. The demo's data come
// from a true model the test knows (examples/laptop_listings.h), so the check is that stepwise
// selection by BIC recovers exactly that model's terms (invented data, known truth).

#include <gtest/gtest.h>

#include <algorithm>
#include <filesystem>
#include <fstream>
#include <set>
#include <sstream>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "../../examples/laptop_listings.h"
#include "support/cli_run.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

namespace fs = std::filesystem;
using nlohmann::json;
using testing::RunStepledger;

std::string ReadBytes(const fs::path& path) {
  std::ifstream in(path, std::ios::binary);
  std::ostringstream bytes;
  bytes << in.rdbuf();
  return bytes.str();
}

std::set<std::string> TrueTerms() {
  return {std::begin(examples::kLaptopTrueTerms), std::end(examples::kLaptopTrueTerms)};
}

std::set<std::string> AuditFinalTerms(const fs::path& audit_path) {
  const json audit = json::parse(ReadBytes(audit_path));
  std::set<std::string> terms;
  for (const json& term : audit.at("model").at("terms")) terms.insert(term.get<std::string>());
  return terms;
}

// The words of the printed line that starts with "  stepledger COMMAND ".
std::vector<std::string> PrintedCommand(const std::string& out, const std::string& command) {
  std::istringstream lines(out);
  for (std::string line; std::getline(lines, line);) {
    if (line.rfind("  stepledger " + command + " ", 0) != 0) continue;
    std::istringstream words(line);
    std::vector<std::string> result;
    for (std::string word; words >> word;) result.push_back(word);
    result.erase(result.begin());  // "stepledger"
    return result;
  }
  return {};
}

class DemoCommand : public ::testing::Test {
 protected:
  testing::TempDir dir_;
  fs::path out_ = dir_.path() / "demo";
};

TEST_F(DemoCommand, StepwiseBicRecoversTheTrueModel) {
  const auto run = RunStepledger({"demo", "--out", out_.string()});
  ASSERT_EQ(run.status, 0) << run.out << run.err;
  EXPECT_EQ(AuditFinalTerms(out_ / "audit.json"), TrueTerms()) << run.out;

  const json audit = json::parse(ReadBytes(out_ / "audit.json"));
  EXPECT_EQ(audit["plan"]["normalised"]["method"], "stepwise");
  EXPECT_EQ(audit["plan"]["normalised"]["criterion"], "bic");
  // The route: ten additions from the intercept, no removal, then the stop.
  const json& steps = audit["steps"];
  ASSERT_EQ(steps.size(), 12u) << steps.dump();
  EXPECT_EQ(steps.front()["action"], "start");
  EXPECT_EQ(steps.back()["action"], "stop");
  for (std::size_t step = 1; step + 1 < steps.size(); ++step) EXPECT_EQ(steps[step]["action"], "add");

  // What it printed: what is generated, the equivalent command, select's route and model,
  // then where the files are and what to try next.
  EXPECT_NE(run.out.find("2000 invented listings"), std::string::npos) << run.out;
  EXPECT_NE(run.out.find("seed 20261201"), std::string::npos);
  EXPECT_NE(run.out.find("stepledger select " + (out_ / "laptops.csv").string() + " --plan " +
                         (out_ / "plan.json").string() + " --out " + out_.string()),
            std::string::npos)
      << run.out;
  EXPECT_NE(run.out.find("final terms (10):"), std::string::npos) << run.out;
  EXPECT_NE(run.out.find("Final model"), std::string::npos);
  EXPECT_NE(run.out.find("Next, try:"), std::string::npos);
  for (const char* command : {"verify", "report", "predict", "rerun"}) {
    EXPECT_FALSE(PrintedCommand(run.out, command).empty()) << "no '" << command << "' suggested\n"
                                                           << run.out;
  }
}

TEST_F(DemoCommand, WritesTheBundledFiles) {
  const auto run = RunStepledger({"demo", "--out", out_.string(), "--quiet"});
  ASSERT_EQ(run.status, 0) << run.err;
  const fs::path source = testing::SourceDir();
  // The demo's files are the bundled ones, byte for byte, so the README's commands on
  // examples/ and on the demo folder agree.
  EXPECT_EQ(ReadBytes(out_ / "laptops.csv"), ReadBytes(source / "examples/data/laptops.csv"));
  EXPECT_EQ(ReadBytes(out_ / "plan.json"), ReadBytes(source / "examples/plans/stepwise_bic.json"));
  EXPECT_EQ(ReadBytes(out_ / "laptops_month2.csv"),
            ReadBytes(source / "examples/data/laptops_month2.csv"));
  EXPECT_EQ(ReadBytes(out_ / "laptops_to_price.csv"),
            ReadBytes(source / "examples/data/laptops_to_price.csv"));
  EXPECT_TRUE(fs::exists(out_ / "audit.json"));
  EXPECT_TRUE(fs::exists(out_ / "report.html")) << "select writes the report beside the audit";
  // --quiet: no notes of the demo's own.
  EXPECT_EQ(run.out.find("Next, try:"), std::string::npos);
  EXPECT_EQ(run.out.find("invented listings"), std::string::npos);
}

TEST_F(DemoCommand, SuggestedCommandsWork) {
  const auto demo = RunStepledger({"demo", "--out", out_.string()});
  ASSERT_EQ(demo.status, 0) << demo.err;

  const std::vector<std::string> verify = PrintedCommand(demo.out, "verify");
  ASSERT_FALSE(verify.empty()) << demo.out;
  const auto verified = RunStepledger(verify);
  EXPECT_EQ(verified.status, 0) << verified.out << verified.err;

  const std::vector<std::string> rerun = PrintedCommand(demo.out, "rerun");
  ASSERT_FALSE(rerun.empty()) << demo.out;
  const auto rerun_run = RunStepledger(rerun);
  ASSERT_EQ(rerun_run.status, 0) << rerun_run.out << rerun_run.err;
  // The second month's documented drift (age slope -6.0 -> -6.8) shows as a fall of the age
  // coefficient by several of its old standard errors (0.8 / 0.22 is about 3.6; invented data).
  const json second = json::parse(ReadBytes(out_ / "month2" / "audit.json"));
  bool age_seen = false;
  for (const json& entry : second["comparison"]["coefficients"]) {
    if (entry["name"] != "age") continue;
    age_seen = true;
    EXPECT_LT(entry["change_in_old_se"].get<double>(), -2.0) << entry.dump();
  }
  EXPECT_TRUE(age_seen) << second["comparison"].dump(2);

  for (const char* command : {"report", "predict"}) {
    const std::vector<std::string> words = PrintedCommand(demo.out, command);
    ASSERT_FALSE(words.empty()) << demo.out;
    const auto run = RunStepledger(words);
    EXPECT_EQ(run.status, 0) << command << ": " << run.err;
    EXPECT_FALSE(run.out.empty()) << command;
  }
}

TEST_F(DemoCommand, RefusesToOverwriteAndNamesTheFiles) {
  fs::create_directories(out_);
  std::ofstream(out_ / "plan.json") << "mine\n";
  std::ofstream(out_ / "audit.json") << "{}\n";
  const auto refused = RunStepledger({"demo", "--out", out_.string()});
  EXPECT_EQ(refused.status, 2);
  ASSERT_EQ(refused.ErrLines().size(), 1u) << refused.err;
  EXPECT_NE(refused.err.find((out_ / "plan.json").string()), std::string::npos) << refused.err;
  EXPECT_NE(refused.err.find((out_ / "audit.json").string()), std::string::npos) << refused.err;
  EXPECT_NE(refused.err.find("--force"), std::string::npos) << refused.err;
  // Nothing was written: the existing files are untouched and no new one appeared.
  EXPECT_EQ(ReadBytes(out_ / "plan.json"), "mine\n");
  EXPECT_FALSE(fs::exists(out_ / "laptops.csv"));

  const auto forced = RunStepledger({"demo", "--out", out_.string(), "--force", "--quiet"});
  ASSERT_EQ(forced.status, 0) << forced.err;
  EXPECT_EQ(ReadBytes(out_ / "plan.json"), examples::MakeLaptopPlan());
  EXPECT_EQ(AuditFinalTerms(out_ / "audit.json"), TrueTerms());
}

TEST_F(DemoCommand, JsonKeepsStdoutForSelectsResult) {
  const auto run = RunStepledger({"demo", "--out", out_.string(), "--json"});
  ASSERT_EQ(run.status, 0) << run.err;
  const json result = json::parse(run.out);  // throws (and fails) when anything else is mixed in
  std::set<std::string> terms;
  for (const json& term : result.at("model").at("terms")) terms.insert(term.get<std::string>());
  EXPECT_EQ(terms, TrueTerms());
  EXPECT_NE(run.err.find("Next, try:"), std::string::npos) << "notes go to stderr with --json";
}

TEST_F(DemoCommand, ForwardsTheThreadCount) {
  const auto run = RunStepledger({"demo", "--out", out_.string(), "--threads", "2"});
  ASSERT_EQ(run.status, 0) << run.err;
  EXPECT_NE(run.out.find("--threads 2"), std::string::npos) << "the printed select command";
  EXPECT_EQ(AuditFinalTerms(out_ / "audit.json"), TrueTerms());
}

TEST_F(DemoCommand, BadOptionsAreRefusedWithOneLine) {
  const auto delimiter = RunStepledger({"demo", "--out", out_.string(), "--delimiter", ";"});
  EXPECT_EQ(delimiter.status, 2);
  ASSERT_EQ(delimiter.ErrLines().size(), 1u) << delimiter.err;
  EXPECT_NE(delimiter.err.find("--delimiter"), std::string::npos) << delimiter.err;
  EXPECT_FALSE(fs::exists(out_));

  const fs::path file = dir_.Write("not_a_folder", "x\n");
  const auto not_folder = RunStepledger({"demo", "--out", file.string()});
  EXPECT_EQ(not_folder.status, 2);
  ASSERT_EQ(not_folder.ErrLines().size(), 1u) << not_folder.err;
  EXPECT_NE(not_folder.err.find("--out"), std::string::npos) << not_folder.err;
  EXPECT_NE(not_folder.err.find(file.string()), std::string::npos) << not_folder.err;

  const auto unknown = RunStepledger({"demo", "--rows", "10"});
  EXPECT_EQ(unknown.status, 2) << unknown.err;
}

// Run as the built program from a folder that does not have it on PATH, the "Next, try" lines
// name the program by the path it was built at (relative to the working folder when it lies
// inside it), so that they run as printed, here through the shell.
TEST(DemoProgramPath, NextTryLinesRunAsPrintedFromTheShell) {
  const fs::path binary = testing::StepledgerBinary();
  const fs::path working = binary.parent_path().parent_path();  // build/, holding cli/stepledger
  testing::TempDir scratch;
  const std::string demo_folder = (scratch.path() / "demo").string();
  std::string out;
  const std::string env = "cd '" + working.string() + "' && PATH=/usr/bin:/bin ";
  ASSERT_EQ(testing::RunCommand(env + "'" + binary.string() + "' demo --out '" + demo_folder + "' 2>&1",
                                &out),
            0)
      << out;
  const std::string program = binary.lexically_relative(working).string();
  std::istringstream lines(out.substr(out.find("Next, try:")));
  std::string line;
  std::getline(lines, line);
  int lines_run = 0;
  while (std::getline(lines, line) && line.rfind("  ", 0) == 0) {
    EXPECT_EQ(line.rfind("  " + program + " ", 0), 0u) << line;
    std::string ignored;
    EXPECT_EQ(testing::RunCommand(env + line.substr(2) + " >/dev/null 2>&1", &ignored), 0) << line;
    ++lines_run;
  }
  EXPECT_EQ(lines_run, 4) << out;
}

}  // namespace
}  // namespace stepledger
