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
  const auto data = dir.Write("golden.csv", kSmallData);
  const auto audit_path = testing::WriteAuditWithLibrary(data, kSmallPlan, dir.path() / "out");
  const json audit = ReadAuditFile(audit_path);
  const ReportDiagnostics diagnostics = DiagnoseAuditRows(audit, data, "audit.json");
  const ReportModel model = BuildReportModel(audit, &diagnostics);
  const std::string actual = Masked(format == "txt" ? RenderTextReport(model) : RenderHtmlReport(model), audit);

  const char* update = std::getenv("STEPLEDGER_UPDATE_GOLDEN");
  if (update != nullptr && std::string(update) == "1") {
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
