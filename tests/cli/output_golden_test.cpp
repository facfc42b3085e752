// Golden files for what the terminal shows: `fit` text and `select --json` of the fixed golden
// case (tests/support/golden_case.h), so that any change to what a user reads or a script parses
// is deliberate. The report's own golden files are in tests/report/golden, the audit's in
// tests/audit/golden.
//
// Masked: the temporary folder's path, and the refinement's last relative correction (a
// rounding-level figure that depends on the BLAS build). The text must match exactly (its
// numbers are rounded for people); the JSON must have the same keys, texts and integers, and
// doubles equal to 1e-12 relative: they are printed in full, and their last digits move with
// the BLAS kernels the machine's CPU selects.
//
// To accept a deliberate change: STEPLEDGER_UPDATE_GOLDEN=1 build/tests/cli_output_golden_test
// rewrites both files; review the diff before committing it.

#include <algorithm>
#include <cmath>
#include <fstream>
#include <regex>
#include <sstream>
#include <string>

#include <gtest/gtest.h>
#include <nlohmann/json.hpp>

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

// The first place where two JSON values differ beyond 1e-12 relative in a double; empty when none.
std::string JsonDifference(const nlohmann::json& golden, const nlohmann::json& actual, const std::string& path) {
  if (golden.is_number_float() || actual.is_number_float()) {
    if (!golden.is_number() || !actual.is_number()) return path + ": " + golden.dump() + " against " + actual.dump();
    const double a = golden.get<double>(), b = actual.get<double>();
    // The refinement's last correction is rounding itself (as the text goldens mask it): its bits
    // follow the BLAS kernels the machine's CPU selects; both below 1e-10 is the same.
    if (path.ends_with(".refinement_correction") && std::abs(a) < 1e-10 && std::abs(b) < 1e-10) return {};
    if (std::abs(a - b) <= 1e-12 * std::max(std::abs(a), std::abs(b))) return {};
    return path + ": " + golden.dump() + " against " + actual.dump();
  }
  if (golden.type() != actual.type()) return path + ": " + golden.dump() + " against " + actual.dump();
  if (golden.is_object()) {
    if (golden.size() != actual.size()) return path + ": the keys differ";
    for (const auto& [key, value] : golden.items()) {
      if (!actual.contains(key)) return path + "." + key + ": missing";
      if (auto difference = JsonDifference(value, actual[key], path + "." + key); !difference.empty()) return difference;
    }
    return {};
  }
  if (golden.is_array()) {
    if (golden.size() != actual.size()) return path + ": " + std::to_string(golden.size()) + " against " +
                                               std::to_string(actual.size()) + " items";
    for (std::size_t i = 0; i < golden.size(); ++i) {
      if (auto difference = JsonDifference(golden[i], actual[i], path + "[" + std::to_string(i) + "]"); !difference.empty()) {
        return difference;
      }
    }
    return {};
  }
  return golden == actual ? std::string() : path + ": " + golden.dump() + " against " + actual.dump();
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
  if (name.ends_with(".json")) {
    EXPECT_EQ(JsonDifference(nlohmann::json::parse(golden.str()), nlohmann::json::parse(actual), "$"), "")
        << "If the change is deliberate, rerun with STEPLEDGER_UPDATE_GOLDEN=1.";
    return;
  }
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
