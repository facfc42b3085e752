// The HTML report rendered from audits made by the real pipeline: it parses (Python's
// html.parser, Debian's python3) with balanced tags, references nothing outside itself, and each
// chart has as many points as its data implies. Expected counts come from the audit itself and
// from the diagnostics pass; nothing here is a numeric reference.

#include <gtest/gtest.h>

#include <algorithm>
#include <set>
#include <string>

#include "stepledger/engine/errors.h"
#include "stepledger/engine/number_format.h"
#include "stepledger/report/report.h"
#include "support/audit_test_data.h"
#include "support/report_audits.h"
#include "support/report_check.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using nlohmann::json;
using testing::ReportAudit;

int CandidatesWithAChart(const json& audit, std::vector<int>* per_step) {
  int total = 0;
  for (const json& step : audit["steps"]) {
    if (step["candidates"].empty()) continue;
    per_step->push_back(static_cast<int>(step["candidates"].size()));
    total += per_step->back();
  }
  return total;
}

int CoefficientsWithAnInterval(const json& audit) {
  int count = 0;
  for (const json& coefficient : audit["model"]["coefficients"]) {
    count += coefficient["ci_low"].is_number() && coefficient["ci_high"].is_number() ? 1 : 0;
  }
  return count;
}

class HtmlReport : public ::testing::Test {
 protected:
  static void SetUpTestSuite() {
    folder_ = std::make_unique<testing::TempDir>();
    stepwise_ = std::make_unique<ReportAudit>(
        testing::MakeReportAudit(*folder_, "stepwise", testing::LaptopCsv(), testing::HierarchyLaptopPlan()));
    subsets_ = std::make_unique<ReportAudit>(testing::MakeReportAudit(
        *folder_, "subsets", testing::LaptopCsv(), testing::HierarchyLaptopPlan("all-subsets")));
    logged_ = std::make_unique<ReportAudit>(testing::MakeReportAudit(
        *folder_, "logged", testing::LaptopCsv(), testing::HierarchyLaptopPlan("forward", "log")));
  }
  static void TearDownTestSuite() {
    stepwise_.reset();
    subsets_.reset();
    logged_.reset();
    folder_.reset();
  }
  void SetUp() override {
    if (!testing::PythonHasModules("html.parser")) {
      GTEST_SKIP() << "Debian's python3 (" << testing::ReferencePython() << ") is not available";
    }
  }

  // Renders, writes and checks a report; the basic checks every report must pass.
  testing::HtmlReportCheck RenderAndCheck(const json& audit, const ReportDiagnostics* diagnostics,
                                          const std::string& name, std::string* html_out = nullptr) {
    const std::string html = RenderHtmlReport(audit, diagnostics);
    const auto path = folder_->Write(name + ".html", html);
    EXPECT_EQ(html.find("http:"), std::string::npos) << name;
    EXPECT_EQ(html.find("https:"), std::string::npos) << name;
    EXPECT_EQ(html.find("<script"), std::string::npos) << name;
    EXPECT_EQ(html.find("<link"), std::string::npos) << name;
    EXPECT_EQ(html.find("<img"), std::string::npos) << name;
    EXPECT_NE(html.find("<meta name=\"viewport\""), std::string::npos) << name;
    EXPECT_NE(html.find("@media print"), std::string::npos) << name;
    testing::HtmlReportCheck check = testing::CheckHtmlReport(path);
    EXPECT_TRUE(check.ran) << check.error;
    EXPECT_TRUE(check.problems.empty()) << name << ": " << check.problems.front();
    EXPECT_TRUE(check.doctype) << name;
    if (html_out != nullptr) *html_out = html;
    return check;
  }

  static std::unique_ptr<testing::TempDir> folder_;
  static std::unique_ptr<ReportAudit> stepwise_, subsets_, logged_;
};

std::unique_ptr<testing::TempDir> HtmlReport::folder_;
std::unique_ptr<ReportAudit> HtmlReport::stepwise_, HtmlReport::subsets_, HtmlReport::logged_;

TEST_F(HtmlReport, StepwiseChartsHaveOnePointPerStepCandidateCoefficientAndRow) {
  const json& audit = stepwise_->audit;
  std::string html;
  const auto check = RenderAndCheck(audit, &stepwise_->diagnostics, "stepwise", &html);
  ASSERT_TRUE(check.ran);
  EXPECT_EQ(check.Count("route-point"), static_cast<int>(audit["steps"].size()));
  std::vector<int> per_step;
  const int candidates = CandidatesWithAChart(audit, &per_step);
  EXPECT_EQ(check.Count("candidate"), candidates);
  std::vector<int> charted;
  for (const auto& [css_class, points] : check.charts) {
    if (css_class.find("candidate-chart") != std::string::npos) {
      charted.push_back(points.count("candidate") ? points.at("candidate") : 0);
    }
  }
  EXPECT_EQ(charted, per_step);
  EXPECT_EQ(check.Count("coef"), CoefficientsWithAnInterval(audit));
  const int rows = testing::RowsWithStandardizedResidual(stepwise_->rows);
  EXPECT_EQ(rows, 200);  // every invented row is used and none has leverage 1
  // The diagnostics views, counted from every row by brute force: at most 120 line ranges (the
  // default), each holding some of the 200 rows; one ▲ per row above 4/n among the largest
  // distances, one per row that stands out among the largest of each measure.
  const testing::DiagnosticsCounts expected = testing::CountDiagnostics(stepwise_->rows, stepwise_->diagnostics.k);
  EXPECT_LE(check.Count("cooks-bin"), 120);
  EXPECT_GE(check.Count("cooks-bin"), 60);
  EXPECT_EQ(check.Count("cooks-flagged"), expected.cooks_above);
  EXPECT_EQ(check.Count("resid-flagged"), expected.stand_out);
  EXPECT_GT(check.Count("density-cell"), 0);
  EXPECT_LE(check.Count("density-cell"), 48 * 28);
  EXPECT_GT(check.Count("hist-bar"), 0);
  EXPECT_LE(check.Count("hist-bar"), 32);
  // One point per fixed probability of the quantile plot.
  EXPECT_EQ(check.Count("qq-point"), static_cast<int>(NormalQuantileProbabilities().size()));
  EXPECT_NE(html.find("qq-chart"), std::string::npos);
  // The views this report does not draw.
  for (const char* gone : {"resid", "lev", "contour"}) EXPECT_EQ(check.Count(gone), 0) << gone;
  EXPECT_EQ(html.find("class=\"contour"), std::string::npos);
  EXPECT_EQ(html.find("lev-chart"), std::string::npos);
  EXPECT_EQ(check.Count("subset-best"), 0);
  // Exactly one chosen candidate per step that made a move.
  int moves = 0;
  for (const json& step : audit["steps"]) moves += step["action"] == "add" || step["action"] == "remove";
  EXPECT_EQ(check.Count("chosen"), moves);
}

TEST_F(HtmlReport, IneligibleCandidatesCarryTheirReasonInATitle) {
  const json& audit = stepwise_->audit;
  std::vector<std::string> reasons;
  for (const json& step : audit["steps"]) {
    for (const json& candidate : step["candidates"]) {
      if (candidate["eligible"] == false) reasons.push_back(candidate["reason"].get<std::string>());
    }
  }
  ASSERT_FALSE(reasons.empty()) << "the plan's power and product should be held back by hierarchy";
  const auto check = RenderAndCheck(audit, nullptr, "stepwise-no-diagnostics");
  ASSERT_TRUE(check.ran);
  ASSERT_EQ(check.ineligible_titles.size(), reasons.size());
  for (std::size_t index = 0; index < reasons.size(); ++index) {
    EXPECT_NE(check.ineligible_titles[index].find("ineligible: " + reasons[index]), std::string::npos)
        << check.ineligible_titles[index];
  }
}

TEST_F(HtmlReport, AllSubsetsDrawsTheBestCriterionOfEveryDistinctSize) {
  const json& audit = subsets_->audit;
  ASSERT_TRUE(audit.contains("subsets"));
  std::set<int> sizes;
  for (const json& subset : audit["subsets"]) {
    if (subset["score"].is_number()) sizes.insert(subset["size"].get<int>());
  }
  ASSERT_GE(sizes.size(), 3u);
  std::string html;
  const auto check = RenderAndCheck(audit, &subsets_->diagnostics, "subsets", &html);
  ASSERT_TRUE(check.ran);
  EXPECT_EQ(check.Count("subset-best"), static_cast<int>(sizes.size()));
  EXPECT_EQ(check.Count("route-point"), static_cast<int>(audit["steps"].size()));
  EXPECT_NE(html.find("id=\"subsets\""), std::string::npos);
  // The chosen size is marked once.
  EXPECT_NE(html.find("pt subset-best chosen"), std::string::npos);
}

TEST_F(HtmlReport, LoggedResponseIsNamedOnTheAxesAndCategoricalColumnsInTheTable) {
  const json& audit = logged_->audit;
  ASSERT_EQ(audit["design"]["response_transform"], "log");
  std::string html;
  const auto check = RenderAndCheck(audit, &logged_->diagnostics, "logged", &html);
  ASSERT_TRUE(check.ran);
  EXPECT_NE(html.find("fitted log(price)"), std::string::npos);
  EXPECT_NE(html.find("residual (log(price) units)"), std::string::npos);
  EXPECT_NE(html.find("modelled on the log scale"), std::string::npos);
  EXPECT_NE(html.find("<td>grade=A</td>"), std::string::npos);
  EXPECT_EQ(check.Count("resid-flagged"),
            testing::CountDiagnostics(logged_->rows, logged_->diagnostics.k).stand_out);
  EXPECT_EQ(check.Count("coef"), CoefficientsWithAnInterval(audit));
}

TEST_F(HtmlReport, WithoutDiagnosticsSaysHowToGetThem) {
  std::string html;
  const auto check = RenderAndCheck(stepwise_->audit, nullptr, "no-diagnostics", &html);
  EXPECT_EQ(check.Count("cooks-bin") + check.Count("density-cell") + check.Count("hist-bar") + check.Count("qq-point"),
            0);
  EXPECT_NE(html.find("stepledger report AUDIT.json --data stepwise.csv"), std::string::npos);
}

TEST_F(HtmlReport, CautionsAndIntegrityAreShown) {
  const json& audit = stepwise_->audit;
  const std::string html = RenderHtmlReport(audit, nullptr);
  ASSERT_FALSE(audit["cautions"].empty());
  for (const json& caution : audit["cautions"]) {
    // Messages contain apostrophes; the report escapes them.
    std::string escaped = caution["message"].get<std::string>();
    std::string expected;
    for (char c : escaped) expected += c == '\'' ? std::string("&#39;") : std::string(1, c);
    EXPECT_NE(html.find(expected), std::string::npos) << expected;
    EXPECT_NE(html.find(caution["kind"].get<std::string>()), std::string::npos);
  }
  // Cautions come before the plan: prominent, not an appendix.
  EXPECT_LT(html.find("id=\"cautions\""), html.find("id=\"plan\""));
  EXPECT_NE(html.find("<dd>" + audit["seal"].get<std::string>() + " (recomputed: matches the content)</dd>"),
            std::string::npos);
  EXPECT_NE(html.find("<dt>Signature</dt><dd>absent"), std::string::npos);
  EXPECT_NE(html.find(audit["tool"]["commit"].get<std::string>()), std::string::npos);
  EXPECT_NE(html.find(audit["data"]["sha256"].get<std::string>()), std::string::npos);

  // A parent (as rerun writes it) shows its seal; an edited document says its seal no longer holds.
  json child = audit;
  child["parent"] = {{"seal", std::string(64, 'a')}, {"created_at", "2026-11-01T00:00:00Z"},
                     {"data_sha256", std::string(64, 'b')}};
  const std::string child_html = RenderHtmlReport(child, nullptr);
  EXPECT_NE(child_html.find("<dt>Parent seal</dt><dd>" + std::string(64, 'a')),
            std::string::npos);
  EXPECT_NE(child_html.find("DOES NOT MATCH"), std::string::npos);
  EXPECT_EQ(html.find("<dt>Parent seal</dt>"), std::string::npos);
}

TEST_F(HtmlReport, StabilityIsRenderedGenericallyWhenPresent) {
  json audit = stepwise_->audit;
  EXPECT_EQ(RenderHtmlReport(audit, nullptr).find("id=\"stability\""), std::string::npos);
  audit["stability"] = {{"inclusion", {{{"term", "age<6>"}, {"frequency", 0.98}}}}};
  std::string html;
  const auto check = RenderAndCheck(audit, nullptr, "stability", &html);
  EXPECT_NE(html.find("id=\"stability\""), std::string::npos);
  EXPECT_NE(html.find("age&lt;6&gt;"), std::string::npos);
  EXPECT_EQ(html.find("age<6>"), std::string::npos);
}

// Small invented data with a term name that needs escaping everywhere it appears.
TEST_F(HtmlReport, TermNamesAreEscaped) {
  std::string csv = "x1,x2,y\n";
  for (int row = 0; row < 30; ++row) {
    const double x1 = row % 7, x2 = (row * 5) % 11;
    csv += std::to_string(x1) + "," + std::to_string(x2) + "," + std::to_string(3 + 2 * x1 + 0.1 * ((row * 37) % 13)) + "\n";
  }
  const std::string name = "a<b&\"c\"";
  nlohmann::json plan = {{"response", "y"},
                         {"terms", {{{"name", name}, {"column", "x1"}}, {{"name", "z'"}, {"column", "x2"}}}},
                         {"method", "forward"}};
  const ReportAudit made = testing::MakeReportAudit(*folder_, "escape", csv, plan.dump());
  ASSERT_NE(made.audit["model"]["terms"].dump().find("a<b"), std::string::npos);  // it was selected
  std::string html;
  const auto check = RenderAndCheck(made.audit, &made.diagnostics, "escape", &html);
  EXPECT_EQ(html.find(name), std::string::npos);
  EXPECT_EQ(html.find("z'"), std::string::npos);
  EXPECT_NE(html.find("a&lt;b&amp;&quot;c&quot;"), std::string::npos);
  EXPECT_NE(html.find("z&#39;"), std::string::npos);
  EXPECT_GT(check.Count("candidate"), 0);
  // The text report shows the name as it is.
  EXPECT_NE(RenderTextReport(made.audit, nullptr).find(name), std::string::npos);
}

TEST_F(HtmlReport, ScreenshotInChromiumIsNotBlank) {
  const std::string html = RenderHtmlReport(stepwise_->audit, &stepwise_->diagnostics);
  const auto path = folder_->Write("screenshot.html", html);
  const std::string outcome = testing::ScreenshotIsNotBlank(path, folder_->path() / "screenshot.png");
  if (outcome.rfind("skip: ", 0) == 0) GTEST_SKIP() << outcome.substr(6);
  EXPECT_EQ(outcome, "");
}

TEST(HtmlReportInput, NotAnAuditIsRefusedNamingTheKey) {
  try {
    RenderHtmlReport(json{{"format", "something-else"}}, nullptr);
    FAIL() << "expected InputError";
  } catch (const InputError& error) {
    EXPECT_NE(std::string(error.what()).find("format"), std::string::npos) << error.what();
  }
  json audit = {{"format", "stepledger-audit"}, {"plan", json::object()}, {"data", json::object()},
                {"design", json::object()}, {"search", json::object()}, {"model", json::object()},
                {"tool", json::object()}, {"steps", {{{"action", "start"}, {"candidates", {1, 2}}}}}};
  try {
    RenderTextReport(audit, nullptr);
    FAIL() << "expected InputError";
  } catch (const InputError& error) {
    EXPECT_NE(std::string(error.what()).find("steps[0].candidates[0]"), std::string::npos) << error.what();
  }
  ReportOptions options;
  options.chart_width = 10;
  EXPECT_THROW(RenderHtmlReport(audit, nullptr, options), InputError);
  options = {};
  options.cooks_bins = 5;
  try {
    BuildReportModel(audit, nullptr, options);
    FAIL() << "expected InputError";
  } catch (const InputError& error) {
    EXPECT_NE(std::string(error.what()).find("ReportOptions.cooks_bins"), std::string::npos) << error.what();
  }
}

TEST(HtmlReportInput, DiagnosticsRefuseDataWithAnotherFingerprint) {
  testing::TempDir folder;
  const auto data = folder.Write("laptops.csv", testing::LaptopCsv());
  const auto audit_path = testing::WriteAuditWithLibrary(data, testing::LaptopPlan(), folder.path() / "run");
  const json audit = ReadAuditFile(audit_path);
  testing::LaptopDataOptions other_options;
  other_options.seed = 7;
  const auto other = folder.Write("other.csv", testing::LaptopCsv(other_options));
  const std::string other_sha = FingerprintFile(other);
  try {
    DiagnoseAuditRows(audit, other, "audit.json");
    FAIL() << "expected InputError";
  } catch (const InputError& error) {
    const std::string message = error.what();
    EXPECT_NE(message.find(other_sha), std::string::npos) << message;
    EXPECT_NE(message.find(audit["data"]["sha256"].get<std::string>()), std::string::npos) << message;
    EXPECT_NE(message.find("other.csv"), std::string::npos) << message;
  }
}

}  // namespace
}  // namespace stepledger
