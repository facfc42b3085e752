// Golden files: the text and the HTML report of a small fixed plan on small fixed invented data
// (with its diagnostics), with the fields that record time, the build or digests masked, must
// match tests/report/golden/small_forward_aic.txt and .html exactly, so that any change to
// what a reviewer reads is deliberate.
//
// To accept a deliberate change: STEPLEDGER_UPDATE_GOLDEN=1 build/tests/report_report_golden_test
// rewrites both files (see DEVELOPERS.md); review the diff before committing it.

#include <algorithm>
#include <cstdlib>
#include <fstream>

#include <gtest/gtest.h>

#include "stepledger/audit/audit_document.h"
#include "stepledger/report/report.h"
#include "support/audit_test_data.h"
#include "support/golden_case.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using nlohmann::json;

using testing::kGoldenData;
using testing::kGoldenPlan;

constexpr const char* kMask = "MASKED";

void ReplaceAll(std::string& text, const std::string& from, const std::string& to) {
  if (from.empty()) return;
  for (std::size_t at = text.find(from); at != std::string::npos; at = text.find(from, at + to.size())) {
    text.replace(at, from.size(), to);
  }
}

// What changes from run to run or build to build: the time (and the seal over it), the tool's
// version, commit and build, and the digests.
std::string Masked(std::string rendered, const json& audit) {
  std::vector<std::string> volatile_texts{audit.value("created_at", ""), audit.value("seal", "")};
  const json& tool = audit["tool"];
  volatile_texts.push_back(tool.value("commit", ""));
  for (const char* key : {"compiler", "build_type", "blas"}) volatile_texts.push_back(tool["build"].value(key, ""));
  volatile_texts.push_back(tool.value("version", ""));
  for (const char* key : {"genesis", "route"}) volatile_texts.push_back(audit["digests"].value(key, ""));
  // Longest first, so that no mask cuts into a longer volatile text.
  std::sort(volatile_texts.begin(), volatile_texts.end(),
            [](const std::string& a, const std::string& b) { return a.size() > b.size(); });
  for (const std::string& text : volatile_texts) ReplaceAll(rendered, text, kMask);
  return rendered;
}

std::filesystem::path GoldenPath(const std::string& extension) {
  return testing::SourceDir() / "tests" / "report" / "golden" / ("small_forward_aic." + extension);
}

class ReportGolden : public ::testing::TestWithParam<std::string> {};

TEST_P(ReportGolden, MatchesTheGoldenFile) {
  const std::string format = GetParam();
  testing::TempDir dir;
  const auto data = dir.Write("golden.csv", kGoldenData);
  const auto audit_path = testing::WriteAuditWithLibrary(data, kGoldenPlan, dir.path() / "out");
  const json audit = ReadAuditFile(audit_path);
  const ReportDiagnostics diagnostics = DiagnoseAuditRows(audit, data, "audit.json");
  const ReportModel model = BuildReportModel(audit, &diagnostics);
  const std::string actual = Masked(format == "txt" ? RenderTextReport(model) : RenderHtmlReport(model), audit);

  if (testing::UpdatingGoldenFiles()) {
    std::filesystem::create_directories(GoldenPath(format).parent_path());
    std::ofstream(GoldenPath(format), std::ios::binary) << actual;
    GTEST_SKIP() << "golden file rewritten: " << GoldenPath(format);
  }
  ASSERT_TRUE(std::filesystem::exists(GoldenPath(format)))
      << GoldenPath(format) << " is missing; run with STEPLEDGER_UPDATE_GOLDEN=1 to create it";
  const std::string golden = testing::ReadText(GoldenPath(format));
  if (golden == actual) return;
  // Name the first line that differs.
  std::size_t line = 1, at = 0;
  while (at < golden.size() && at < actual.size() && golden[at] == actual[at]) line += golden[at++] == '\n';
  const std::size_t start = golden.rfind('\n', at == 0 ? 0 : at - 1);
  const std::size_t from = start == std::string::npos ? 0 : start + 1;
  ADD_FAILURE() << GoldenPath(format).filename() << " differs at line " << line << ":\n  golden: "
                << golden.substr(from, golden.find('\n', from) - from) << "\n  now:    "
                << actual.substr(from, actual.find('\n', from) - from)
                << "\nIf the change is deliberate, rerun with STEPLEDGER_UPDATE_GOLDEN=1.";
}

INSTANTIATE_TEST_SUITE_P(TextAndHtml, ReportGolden, ::testing::Values("txt", "html"),
                         [](const auto& info) { return info.param == "txt" ? std::string("Text") : std::string("Html"); });

TEST(ReportGoldenMask, MasksOnlyTheVolatileFields) {
  const json audit = {{"created_at", "2026-12-01T10:00:00Z"},
                      {"seal", "abc123"},
                      {"tool", {{"commit", "deadbeef"}, {"version", "0.1.0"}, {"build", {{"compiler", "GNU 12"}}}}},
                      {"digests", {{"genesis", "g1"}, {"route", "r1"}}}};
  EXPECT_EQ(Masked("created 2026-12-01T10:00:00Z seal abc123 by 0.1.0 (GNU 12) price 1,180", audit),
            "created MASKED seal MASKED by MASKED (MASKED) price 1,180");
}

}  // namespace
}  // namespace stepledger
