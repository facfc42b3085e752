// Golden files for what the terminal shows: `fit` text and `select --json` of the fixed golden
// case (tests/support/golden_case.h), so that any change to what a user reads or a script parses
// is deliberate. The report's own golden files are in tests/report/golden, the audit's in
// tests/audit/golden.
//
// Masked: the temporary folder's path, and the refinement's last relative correction (a
// rounding-level figure that depends on the BLAS build). Everything else must match exactly.
//
// To accept a deliberate change: STEPLEDGER_UPDATE_GOLDEN=1 build/tests/cli_output_golden_test
// rewrites both files; review the diff before committing it.

#include <fstream>
#include <regex>
#include <sstream>
#include <string>

#include <gtest/gtest.h>

#include "support/cli_run.h"
#include "support/golden_case.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

std::filesystem::path GoldenPath(const std::string& name) {
  return testing::SourceDir() / "tests" / "cli" / "golden" / name;
}

std::string Masked(std::string text, const std::filesystem::path& folder) {
  for (std::size_t at = text.find(folder.string()); at != std::string::npos;
       at = text.find(folder.string(), at)) {
    text.replace(at, folder.string().size(), "TMP");
  }
  return std::regex_replace(text, std::regex("last relative correction [^,\\n\"]*"),
                            "last relative correction MASKED");
}

void ExpectGolden(const std::string& name, const std::string& actual) {
  if (testing::UpdatingGoldenFiles()) {
    std::ofstream(GoldenPath(name), std::ios::binary) << actual;
    GTEST_SKIP() << "golden file rewritten: " << GoldenPath(name);
  }
  std::ifstream in(GoldenPath(name), std::ios::binary);
  ASSERT_TRUE(in) << GoldenPath(name) << " is missing; run with STEPLEDGER_UPDATE_GOLDEN=1";
  std::stringstream golden;
  golden << in.rdbuf();
  EXPECT_EQ(golden.str(), actual) << "If the change is deliberate, rerun with STEPLEDGER_UPDATE_GOLDEN=1.";
}

class OutputGolden : public ::testing::Test {
 protected:
  void SetUp() override {
    data_ = folder_.Write("golden.csv", testing::kGoldenData).string();
    plan_ = folder_.Write("plan.json", testing::kGoldenPlan).string();
  }
  testing::TempDir folder_;
  std::string data_, plan_;
};

TEST_F(OutputGolden, FitText) {
  const testing::CliRun run = testing::RunStepledger({"fit", data_, "--plan", plan_});
  ASSERT_EQ(run.status, 0) << run.err;
  ExpectGolden("fit_golden_case.txt", Masked(run.out, folder_.path()));
}

TEST_F(OutputGolden, SelectJson) {
  const testing::CliRun run = testing::RunStepledger({"select", data_, "--plan", plan_, "--json"});
  ASSERT_EQ(run.status, 0) << run.err;
  ExpectGolden("select_golden_case.json", Masked(run.out, folder_.path()));
}

}  // namespace
}  // namespace stepledger
