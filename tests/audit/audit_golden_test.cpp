// Golden file: the audit of a small fixed plan on small fixed data, with the fields that record
// time or the build masked, must match tests/audit/golden/small_forward_aic.json, so that any
// change to the audit format is deliberate. Numbers compare to 1e-9 relative (the replay
// tolerance), everything else exactly.
//
// To accept a deliberate change: STEPLEDGER_UPDATE_GOLDEN=1 ./tests/audit_audit_golden_test
// rewrites the golden file (see DEVELOPERS.md); review the diff before committing it.

#include <cstdlib>
#include <fstream>

#include <gtest/gtest.h>

#include "stepledger/audit/audit_document.h"
#include "stepledger/audit/audit_verify.h"
#include "support/audit_test_data.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using nlohmann::json;

// Sixteen invented laptops (no real brands): age in months, memory, condition grade, price.
constexpr const char* kSmallData =
    "age_months,ram_gb,grade,battery_cycles,price\n"
    "6,16,A,120,1180\n"
    "12,8,B,340,860\n"
    "18,16,B,410,905\n"
    "24,8,C,650,610\n"
    "30,32,A,300,1215\n"
    "36,8,B,720,640\n"
    "9,4,C,150,720\n"
    "15,16,A,260,1090\n"
    "21,8,A,500,930\n"
    "27,16,C,610,700\n"
    "33,4,B,800,515\n"
    "39,32,B,350,940\n"
    "45,8,C,880,395\n"
    "48,16,A,900,820\n"
    "3,8,B,60,1010\n"
    "54,4,C,950,300\n";

constexpr const char* kSmallPlan = R"({
  "response": "price",
  "terms": [
    {"name": "age", "column": "age_months"},
    {"name": "ram", "column": "ram_gb"},
    {"name": "grade", "categorical": "grade", "baseline": "B"},
    {"name": "battery", "column": "battery_cycles"}
  ],
  "method": "forward",
  "criterion": "aic"
}
)";

constexpr const char* kMask = "<masked: time, build or digest>";

// Time fields, the build, and everything derived from exact bits (digests, seal).
json Masked(json document) {
  for (auto field : kAuditTimeFields) document[std::string(field)] = kMask;
  document["seal"] = kMask;
  document["tool"]["commit"] = kMask;
  document["tool"]["build"] = kMask;
  document["digests"] = kMask;
  for (json& step : document["steps"]) step["digest"] = kMask;
  return document;
}

std::filesystem::path GoldenPath() {
  return testing::SourceDir() / "tests" / "audit" / "golden" / "small_forward_aic.json";
}

TEST(AuditGolden, SmallForwardAicMatchesTheGoldenFile) {
  testing::TempDir dir;
  const auto data = dir.Write("golden.csv", kSmallData);
  const auto audit = testing::WriteAuditWithLibrary(data, kSmallPlan, dir.path() / "out");
  const json actual = Masked(testing::ReadJsonFile(audit));

  const char* update = std::getenv("STEPLEDGER_UPDATE_GOLDEN");
  if (update != nullptr && std::string(update) == "1") {
    std::filesystem::create_directories(GoldenPath().parent_path());
    testing::WriteJsonFile(GoldenPath(), actual);
    GTEST_SKIP() << "golden file rewritten: " << GoldenPath();
  }
  ASSERT_TRUE(std::filesystem::exists(GoldenPath()))
      << GoldenPath() << " is missing; run with STEPLEDGER_UPDATE_GOLDEN=1 to create it";
  const json golden = testing::ReadJsonFile(GoldenPath());
  const auto difference = FirstJsonDifference(golden, actual, "", 1e-9, "in the golden file", "now");
  EXPECT_FALSE(difference.has_value())
      << *difference << "\nIf the change is deliberate, rerun with STEPLEDGER_UPDATE_GOLDEN=1.";

  const std::string problems = testing::ValidateAuditAgainstSchema(audit);
  if (problems != "skip") {
    EXPECT_EQ(problems, "");
  }
}

TEST(AuditGolden, ControlAChangedValueIsCaught) {
  if (!std::filesystem::exists(GoldenPath())) GTEST_SKIP() << "no golden file yet";
  json golden = testing::ReadJsonFile(GoldenPath());
  json changed = golden;
  changed["model"]["coefficients"][0]["estimate"] = changed["model"]["coefficients"][0]["estimate"].get<double>() * (1 + 1e-8);
  EXPECT_TRUE(FirstJsonDifference(golden, changed, "", 1e-9).has_value());
  changed = golden;
  changed["steps"][1]["rule"] = "another rule";
  EXPECT_TRUE(FirstJsonDifference(golden, changed, "", 1e-9).has_value());
}

}  // namespace
}  // namespace stepledger
