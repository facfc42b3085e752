// `stepledger report` and the report.html that `select --out` writes, run in-process on the
// invented laptop data.

#include <gtest/gtest.h>

#include <filesystem>
#include <string>

#include <nlohmann/json.hpp>

#include "stepledger/audit/audit_document.h"
#include "support/audit_test_data.h"
#include "support/cli_run.h"
#include "support/csv_text.h"
#include "support/report_audits.h"
#include "support/report_check.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using testing::CliRun;
using testing::RunStepledger;

class ReportCommand : public ::testing::Test {
 protected:
  void SetUp() override {
    data_ = folder_.Write("laptops.csv", testing::LaptopCsv()).string();
    plan_ = folder_.Write("plan.json", testing::HierarchyLaptopPlan()).string();
    out_ = (folder_.path() / "run").string();
  }
  CliRun Select(const std::vector<std::string>& extra = {}) {
    std::vector<std::string> args{"select", data_, "--plan", plan_, "--out", out_};
    args.insert(args.end(), extra.begin(), extra.end());
    return RunStepledger(args);
  }
  testing::TempDir folder_;
  std::string data_, plan_, out_;
};

TEST_F(ReportCommand, SelectOutWritesTheReportWithDiagnosticsBesideTheAudit) {
  const CliRun run = Select();
  ASSERT_EQ(run.status, 0) << run.err;
  const auto report = std::filesystem::path(out_) / "report.html";
  ASSERT_TRUE(std::filesystem::exists(report));
  const nlohmann::json audit = ReadAuditFile(std::filesystem::path(out_) / "audit.json");
  const std::string html = testing::ReadText(report);
  // Rendered from the written audit: its seal is in the header.
  EXPECT_NE(html.find(audit["seal"].get<std::string>()), std::string::npos);
  if (!testing::PythonHasModules("html.parser")) GTEST_SKIP() << "Debian's python3 is not available";
  const auto check = testing::CheckHtmlReport(report);
  ASSERT_TRUE(check.ran) << check.error;
  EXPECT_TRUE(check.problems.empty()) << check.problems.front();
  EXPECT_EQ(check.Count("route-point"), static_cast<int>(audit["steps"].size()));
  // The diagnostics are in: at most 120 Cook's distance line ranges (the default; 200 rows
  // fill most of them), and a histogram.
  EXPECT_LE(check.Count("cooks-bin"), 120);
  EXPECT_GE(check.Count("cooks-bin"), 60);
  EXPECT_GT(check.Count("hist-bar"), 0);
  // verify still holds for the audit written beside the report.
  EXPECT_EQ(RunStepledger({"verify", (std::filesystem::path(out_) / "audit.json").string()}).status, 0);
}

TEST_F(ReportCommand, SelectRefusesAnExistingReportAndLeavesNoAuditBehind) {
  std::filesystem::create_directory(out_);
  folder_.Write("run/report.html", "old report");
  const CliRun refused = Select();
  EXPECT_EQ(refused.status, 2);
  EXPECT_NE(refused.err.find("report.html: file exists; use --force"), std::string::npos) << refused.err;
  EXPECT_FALSE(std::filesystem::exists(std::filesystem::path(out_) / "audit.json"));
  EXPECT_EQ(testing::ReadText(std::filesystem::path(out_) / "report.html"), "old report");
  const CliRun forced = Select({"--force"});
  EXPECT_EQ(forced.status, 0) << forced.err;
  EXPECT_NE(testing::ReadText(std::filesystem::path(out_) / "report.html").find("<!DOCTYPE html>"), std::string::npos);
}

TEST_F(ReportCommand, SelectRemovesItsAuditWhenTheReportCannotBeWritten) {
  // A folder named report.html cannot be replaced by a file, even with --force.
  std::filesystem::create_directories(std::filesystem::path(out_) / "report.html" / "inside");
  const CliRun run = Select({"--force"});
  EXPECT_EQ(run.status, 2) << run.err;
  EXPECT_NE(run.err.find("report.html"), std::string::npos) << run.err;
  EXPECT_FALSE(std::filesystem::exists(std::filesystem::path(out_) / "audit.json"));
}

TEST_F(ReportCommand, TextByDefaultHtmlToAFileAndBothTogether) {
  ASSERT_EQ(Select().status, 0);
  const std::string audit = (std::filesystem::path(out_) / "audit.json").string();
  const CliRun text = RunStepledger({"report", audit});
  ASSERT_EQ(text.status, 0) << text.err;
  EXPECT_NE(text.out.find("\nThe route\n"), std::string::npos);
  EXPECT_NE(text.out.find("\nCautions for this run\n"), std::string::npos);
  EXPECT_NE(text.out.find("stepledger report AUDIT.json --data laptops.csv"), std::string::npos);

  const std::string html = (folder_.path() / "review.html").string();
  const CliRun only_html = RunStepledger({"report", audit, "--html", html});
  ASSERT_EQ(only_html.status, 0) << only_html.err;
  EXPECT_EQ(only_html.out, "");
  EXPECT_NE(testing::ReadText(html).find("</html>"), std::string::npos);

  const CliRun again = RunStepledger({"report", audit, "--html", html});
  EXPECT_EQ(again.status, 2);
  EXPECT_NE(again.err.find("review.html"), std::string::npos) << again.err;
  EXPECT_NE(again.err.find("--force"), std::string::npos) << again.err;
  ASSERT_EQ(again.ErrLines().size(), 1u);

  const CliRun both = RunStepledger({"report", audit, "--html", html, "--text", "--force"});
  ASSERT_EQ(both.status, 0) << both.err;
  EXPECT_EQ(both.out, text.out);

  // --json prints the report model itself (not a status object).
  const CliRun json = RunStepledger({"report", audit, "--json"});
  ASSERT_EQ(json.status, 0) << json.err;
  const nlohmann::json model = nlohmann::json::parse(json.out);
  EXPECT_EQ(model["format"], "stepledger-report");
  EXPECT_EQ(model["diagnostics"], false);
  EXPECT_EQ(model["verified"], true);
  ASSERT_TRUE(model["sections"].is_array());
  EXPECT_EQ(model["sections"][0]["id"], "summary");
  const CliRun clash = RunStepledger({"report", audit, "--json", "--text"});
  EXPECT_EQ(clash.status, 2);
  ASSERT_EQ(clash.ErrLines().size(), 1u) << clash.err;
}

TEST_F(ReportCommand, DataAddsDiagnosticsAndTheWrongFileIsRefusedNamingBothDigests) {
  ASSERT_EQ(Select().status, 0);
  const std::string audit = (std::filesystem::path(out_) / "audit.json").string();
  const CliRun with_data = RunStepledger({"report", audit, "--data", data_});
  ASSERT_EQ(with_data.status, 0) << with_data.err;
  EXPECT_NE(with_data.out.find("Rows diagnosed:      200\n"), std::string::npos) << with_data.out;

  testing::LaptopDataOptions other_options;
  other_options.rows = 150;
  const std::string other = folder_.Write("other.csv", testing::LaptopCsv(other_options)).string();
  const CliRun wrong = RunStepledger({"report", audit, "--data", other, "--html", (folder_.path() / "x.html").string()});
  EXPECT_EQ(wrong.status, 2);
  ASSERT_EQ(wrong.ErrLines().size(), 1u) << wrong.err;
  EXPECT_NE(wrong.err.find(FingerprintFile(other)), std::string::npos) << wrong.err;
  EXPECT_NE(wrong.err.find(ReadAuditFile(audit)["data"]["sha256"].get<std::string>()), std::string::npos)
      << wrong.err;
  EXPECT_FALSE(std::filesystem::exists(folder_.path() / "x.html"));
}

TEST_F(ReportCommand, BadInputIsOneLineWithExitTwo) {
  const std::string not_audit = folder_.Write("not-audit.json", "{\"format\": \"other\"}").string();
  const CliRun run = RunStepledger({"report", not_audit});
  EXPECT_EQ(run.status, 2);
  EXPECT_NE(run.err.find("not-audit.json"), std::string::npos) << run.err;
  ASSERT_EQ(run.ErrLines().size(), 1u);
  EXPECT_EQ(RunStepledger({"report", (folder_.path() / "missing.json").string()}).status, 2);
}

TEST_F(ReportCommand, AnAuditThatDoesNotVerifyIsRefusedUnlessAllowedAndThenWarned) {
  ASSERT_EQ(Select().status, 0);
  const auto audit_path = std::filesystem::path(out_) / "audit.json";
  nlohmann::json edited = ReadAuditFile(audit_path);
  edited["model"]["coefficients"][1]["estimate"] = 1234.5;  // priced with an edited coefficient
  const std::string edited_path = folder_.Write("edited.json", edited.dump(2)).string();
  const std::string html = (folder_.path() / "edited.html").string();

  const CliRun refused = RunStepledger({"report", edited_path, "--html", html});
  EXPECT_EQ(refused.status, 1);
  ASSERT_EQ(refused.ErrLines().size(), 1u) << refused.err;
  EXPECT_NE(refused.err.find("edited.json: the audit does not verify (key 'model'"), std::string::npos) << refused.err;
  EXPECT_NE(refused.err.find("--allow-unverified"), std::string::npos) << refused.err;
  EXPECT_EQ(refused.out, "");
  EXPECT_FALSE(std::filesystem::exists(html));

  const CliRun text = RunStepledger({"report", edited_path, "--allow-unverified"});
  ASSERT_EQ(text.status, 0) << text.err;
  EXPECT_EQ(text.out.rfind("!! WARNING: this audit does not verify", 0), 0u) << text.out.substr(0, 200);
  EXPECT_NE(text.out.find("!! key 'model' does not match its digest"), std::string::npos);

  ASSERT_EQ(RunStepledger({"report", edited_path, "--allow-unverified", "--html", html}).status, 0);
  const std::string page = testing::ReadText(html);
  EXPECT_LT(page.find("<section id=\"unverified\""), page.find("<header>"));

  const CliRun json = RunStepledger({"report", edited_path, "--allow-unverified", "--json"});
  ASSERT_EQ(json.status, 0) << json.err;
  const nlohmann::json model = nlohmann::json::parse(json.out);
  EXPECT_EQ(model["verified"], false);
  EXPECT_NE(model["warning"][1].get<std::string>().find("key 'model'"), std::string::npos);

  // The untouched audit renders without a warning.
  const CliRun clean = RunStepledger({"report", audit_path.string()});
  ASSERT_EQ(clean.status, 0);
  EXPECT_EQ(clean.out.find("WARNING"), std::string::npos);
}

TEST_F(ReportCommand, RowsOutWritesEveryRowThatStandsOutInFileOrder) {
  ASSERT_EQ(Select().status, 0);
  const std::string audit = (std::filesystem::path(out_) / "audit.json").string();
  const std::string rows = (folder_.path() / "rows.csv").string();
  const CliRun run = RunStepledger({"report", audit, "--data", data_, "--rows-out", rows});
  ASSERT_EQ(run.status, 0) << run.err;
  const std::vector<std::vector<std::string>> csv = testing::ParseCsvRecords(testing::ReadText(rows));
  ASSERT_GE(csv.size(), 2u);
  EXPECT_EQ(csv[0], (std::vector<std::string>{"line", "fitted", "residual", "standardized_residual", "leverage",
                                              "cooks_distance", "reasons"}));
  // As many rows as the text says stand out, in file order (written during the pass).
  const std::string count_line = "Rows that stand out: " + std::to_string(csv.size() - 1) + "\n";
  EXPECT_NE(run.out.find(count_line), std::string::npos) << run.out;
  for (std::size_t index = 2; index < csv.size(); ++index) {
    EXPECT_LT(std::stoull(csv[index - 1][0]), std::stoull(csv[index][0])) << index;
  }
  // Written atomically: refused without --force, replaced with it.
  const CliRun again = RunStepledger({"report", audit, "--data", data_, "--rows-out", rows});
  EXPECT_EQ(again.status, 2);
  EXPECT_NE(again.err.find("rows.csv"), std::string::npos) << again.err;
  EXPECT_EQ(RunStepledger({"report", audit, "--data", data_, "--rows-out", rows, "--force"}).status, 0);
  // Without --data there are no rows to list.
  const CliRun no_data = RunStepledger({"report", audit, "--rows-out", (folder_.path() / "x.csv").string()});
  EXPECT_EQ(no_data.status, 2);
  EXPECT_NE(no_data.err.find("--rows-out"), std::string::npos) << no_data.err;
  EXPECT_FALSE(std::filesystem::exists(folder_.path() / "x.csv"));
  // A failure after the pass (the HTML target exists, no --force) leaves no rows file and no
  // temporary file behind.
  const std::string html = folder_.Write("taken.html", "x").string();
  const std::string late = (folder_.path() / "late.csv").string();
  const CliRun failed = RunStepledger({"report", audit, "--data", data_, "--rows-out", late, "--html", html});
  EXPECT_EQ(failed.status, 2) << failed.err;
  EXPECT_FALSE(std::filesystem::exists(late));
  for (const auto& entry : std::filesystem::directory_iterator(folder_.path())) {
    EXPECT_EQ(entry.path().filename().string().find(".tmp."), std::string::npos) << entry.path();
  }
}

TEST(ReportCommandScale, ReportOfTwoHundredThousandRowsStaysSmallAndParses) {
  testing::TempDir folder;
  testing::LaptopDataOptions options;
  options.rows = 200000;
  const std::string data = folder.Write("laptops.csv", testing::LaptopCsv(options)).string();
  const std::string plan = folder.Write("plan.json", testing::HierarchyLaptopPlan()).string();
  const std::string out = (folder.path() / "run").string();
  const CliRun run = RunStepledger({"select", data, "--plan", plan, "--out", out});
  ASSERT_EQ(run.status, 0) << run.err;
  const auto report = std::filesystem::path(out) / "report.html";
  const auto bytes = std::filesystem::file_size(report);
  RecordProperty("report_html_bytes_200000_rows", static_cast<int>(bytes));
  EXPECT_LT(bytes, 3u * 1000 * 1000);
  if (!testing::PythonHasModules("html.parser")) GTEST_SKIP() << "Debian's python3 is not available";
  const auto check = testing::CheckHtmlReport(report);
  ASSERT_TRUE(check.ran) << check.error;
  EXPECT_TRUE(check.problems.empty()) << check.problems.front();
  // Every diagnostics chart is there.
  for (const char* kind : {"cooks-bin", "cooks-flagged", "density-cell", "hist-bar", "qq-point"}) {
    EXPECT_GT(check.Count(kind), 0) << kind;
  }
}

TEST(ReportCommandHelp, TeachesTheSectionsAndGivesExamples) {
  const CliRun help = RunStepledger({"report", "--help"});
  ASSERT_EQ(help.status, 0);
  for (const char* text : {"--html", "--text", "--data", "--force", "--rows-out", "--allow-unverified", "--json",
                           "Cook's distance", "cautions",
                           "integrity", "Examples:", "stepledger report build/demo/audit.json"}) {
    EXPECT_NE(help.out.find(text), std::string::npos) << text;
  }
}

}  // namespace
}  // namespace stepledger
