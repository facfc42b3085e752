// Golden file: the audit of a small fixed plan on small fixed data, with the fields that record
// time or the build masked, must match tests/audit/golden/small_forward_aic.json, so that any
// change to the audit format is deliberate. Numbers compare to 1e-9 relative (the replay
// tolerance), everything else exactly.
//
// To accept a deliberate change: STEPLEDGER_UPDATE_GOLDEN=1 ./tests/audit_audit_golden_test
// rewrites the golden file (see DEVELOPERS.md); review the diff before committing it.

#include <cmath>
#include <cstdlib>
#include <fstream>

#include <gtest/gtest.h>

#include "stepledger/audit/audit_document.h"
#include "stepledger/audit/audit_verify.h"
#include "support/audit_test_data.h"
#include "support/golden_case.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using nlohmann::json;

using testing::kGoldenData;
using testing::kGoldenPlan;

constexpr const char* kMask = "<masked: time, build or digest>";

// Time fields, the build, and everything derived from exact bits (digests, seal).
json Masked(json document) {
  for (auto field : kAuditTimeFields) document[std::string(field)] = kMask;
  document["seal"] = kMask;
  document["tool"]["commit"] = kMask;
  document["tool"]["build"] = kMask;
  document["digests"] = kMask;
  for (json& step : document["steps"]) step["digest"] = kMask;
  // The size of the refinement's last correction is rounding itself (about 1e-15): its bits
  // follow the BLAS kernels the machine's CPU selects, so only its order is kept.
  for (const char* section : {"model", "numerics"}) {
    json& correction = document[section]["refinement_correction"];
    if (correction.is_number() && std::abs(correction.get<double>()) < 1e-10) correction = "below 1e-10 (rounding)";
  }
  return document;
}

std::filesystem::path GoldenPath() {
  return testing::SourceDir() / "tests" / "audit" / "golden" / "small_forward_aic.json";
}

TEST(AuditGolden, SmallForwardAicMatchesTheGoldenFile) {
  testing::TempDir dir;
  const auto data = dir.Write("golden.csv", kGoldenData);
  const auto audit = testing::WriteAuditWithLibrary(data, kGoldenPlan, dir.path() / "out");
  const json actual = Masked(testing::ReadJsonFile(audit));

  if (testing::UpdatingGoldenFiles()) {
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
