// Every example in a command's --help runs as printed from the repository root after
// `bash scripts/demo.sh` (which writes build/demo), and they all use that one folder. Here the
// demo writes TMP/build/demo, the working folder is TMP, and each example line is run
// in-process (in tests the program word is `stepledger`: the test binary is not the program).

#include <gtest/gtest.h>

#include <filesystem>
#include <sstream>
#include <string>
#include <vector>

#include "support/cli_run.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using testing::RunStepledger;

// The example lines of a help text: the lines after "Example:"/"Examples:" that start with
// "  stepledger ".
std::vector<std::vector<std::string>> ExampleCommands(const std::string& help) {
  std::vector<std::vector<std::string>> commands;
  std::istringstream lines(help);
  std::string line;
  bool in_examples = false;
  while (std::getline(lines, line)) {
    if (line == "Example:" || line == "Examples:") {
      in_examples = true;
      continue;
    }
    if (!in_examples || line.rfind("  stepledger ", 0) != 0) continue;
    std::istringstream words(line.substr(13));
    std::vector<std::string> args;
    for (std::string word; words >> word;) args.push_back(word);
    commands.push_back(args);
  }
  return commands;
}

class HelpExamples : public ::testing::Test {
 protected:
  void SetUp() override {
    previous_ = std::filesystem::current_path();
    std::filesystem::current_path(root_.path());
    const auto demo = RunStepledger({"demo", "--out", "build/demo", "--quiet"});
    ASSERT_EQ(demo.status, 0) << demo.err;
  }
  void TearDown() override { std::filesystem::current_path(previous_); }
  testing::TempDir root_;
  std::filesystem::path previous_;
};

TEST_F(HelpExamples, EveryExampleRunsAsPrintedOnTheDemoFolder) {
  // In an order where each example finds what an earlier one made (compare's first line is
  // the rerun it needs).
  for (const char* command : {"profile", "fit", "select", "verify", "rerun", "compare", "predict", "report", "demo"}) {
    const auto help = RunStepledger({command, "--help"});
    ASSERT_EQ(help.status, 0);
    const auto examples = ExampleCommands(help.out);
    ASSERT_FALSE(examples.empty()) << command << " --help has no example:\n" << help.out;
    for (const auto& args : examples) {
      std::string printed;
      for (const auto& word : args) printed += " " + word;
      bool uses_demo_folder = false;
      for (const auto& word : args) uses_demo_folder |= word.rfind("build/demo", 0) == 0;
      EXPECT_TRUE(uses_demo_folder) << "stepledger" << printed;
      auto run = RunStepledger(args);
      // compare's exit 1 says the models differ (a rerun on new data refits): it ran.
      const int expected = args[0] == "compare" ? 1 : 0;
      EXPECT_EQ(run.status, expected) << "stepledger" << printed << "\n" << run.err;
      // Run twice: an example that writes must not fail the second time it is typed.
      run = RunStepledger(args);
      EXPECT_EQ(run.status, expected) << "again: stepledger" << printed << "\n" << run.err;
    }
  }
}

}  // namespace
}  // namespace stepledger
