// The report's Validation section: the model holds the k-fold RMSE beside the residual SD and
// the folds table, the holdout metrics, calibration table and chart (with the identity line), the
// bootstrap's inclusion and size charts, top models, coefficient intervals beside the model's and
// the substitute pairs; the HTML draws every chart with one point or bar per value. Audits made
// by the real pipeline on the invented laptop data; validation numbers invented
// (support/validation_fixture.h): these tests are about the rendering.

#include <gtest/gtest.h>

#include "stepledger/audit/validation_json.h"
#include "stepledger/report/report.h"
#include "support/report_audits.h"
#include "support/report_check.h"
#include "support/validation_fixture.h"

namespace stepledger {
namespace {

using nlohmann::json;

class ReportValidation : public ::testing::Test {
 protected:
  static void SetUpTestSuite() {
    folder_ = new testing::TempDir();
    made_ = new testing::ReportAudit(
        testing::MakeReportAudit(*folder_, "validation", testing::LaptopCsv(), testing::HierarchyLaptopPlan()));
    audit_ = new json(made_->audit);
    std::vector<std::string> candidates, final_terms;
    for (const json& term : (*audit_)["design"]["terms"]) candidates.push_back(term["name"].get<std::string>());
    for (const json& term : (*audit_)["model"]["terms"]) final_terms.push_back(term.get<std::string>());
    std::vector<std::pair<std::string, double>> coefficients;
    for (const json& coefficient : (*audit_)["model"]["coefficients"]) {
      coefficients.emplace_back(coefficient["name"].get<std::string>(), coefficient["estimate"].get<double>());
    }
    validation_ = new ValidationResult(testing::FilledValidation(candidates, final_terms, coefficients,
                                                                 (*audit_)["model"]["sigma"].get<double>()));
    (*audit_)["validation"] = ValidationToJson(*validation_);
  }
  static void TearDownTestSuite() {
    delete validation_;
    delete audit_;
    delete made_;
    delete folder_;
  }
  template <typename Block>
  static std::vector<const Block*> BlocksOf(const ReportSection& section) {
    std::vector<const Block*> blocks;
    for (const ReportBlock& block : section.blocks) {
      if (const Block* found = std::get_if<Block>(&block)) blocks.push_back(found);
    }
    return blocks;
  }
  static const ReportChart* Chart(const ReportSection& section, const std::string& id) {
    for (const ReportChart* chart : BlocksOf<ReportChart>(section)) {
      if (chart->id == id) return chart;
    }
    return nullptr;
  }
  static const ReportTable* Table(const ReportSection& section, const std::string& caption_start) {
    for (const ReportTable* table : BlocksOf<ReportTable>(section)) {
      if (table->caption.rfind(caption_start, 0) == 0) return table;
    }
    return nullptr;
  }
  static testing::TempDir* folder_;
  static testing::ReportAudit* made_;
  static json* audit_;
  static ValidationResult* validation_;
};
testing::TempDir* ReportValidation::folder_ = nullptr;
testing::ReportAudit* ReportValidation::made_ = nullptr;
json* ReportValidation::audit_ = nullptr;
ValidationResult* ReportValidation::validation_ = nullptr;

TEST_F(ReportValidation, TheModelHoldsEveryPart) {
  const ReportModel model = BuildReportModel(*audit_, nullptr);
  const ReportSection* section = model.Find("validation");
  ASSERT_NE(section, nullptr);
  EXPECT_EQ(section->title, "Validation");
  const ReportFacts* facts = BlocksOf<ReportFacts>(*section).front();
  ASSERT_GE(facts->facts.size(), 2u);
  EXPECT_EQ(facts->facts[0].label, "5-fold RMSE (seed 1)");
  EXPECT_EQ(facts->facts[0].value.number, 26.5);
  EXPECT_EQ(facts->facts[1].label, "In-sample residual SD");
  EXPECT_EQ(facts->facts[1].value.number, (*audit_)["model"]["sigma"].get<double>());

  const ReportTable* folds = Table(*section, "Held-out error by fold");
  ASSERT_NE(folds, nullptr);
  EXPECT_EQ(folds->rows.size(), 5u);
  EXPECT_EQ(folds->rows[3][3].number, 27376.5);

  const ReportTable* calibration = Table(*section, "Calibration");
  ASSERT_NE(calibration, nullptr);
  EXPECT_EQ(calibration->rows.size(), 10u);
  const ReportChart* calibration_chart = Chart(*section, "calibration-chart");
  ASSERT_NE(calibration_chart, nullptr);
  ASSERT_EQ(calibration_chart->series.size(), 2u);
  EXPECT_EQ(calibration_chart->series[0].line_class, "ref") << "the identity line";
  EXPECT_EQ(calibration_chart->series[0].points.front().x, calibration_chart->series[0].points.front().y);
  EXPECT_EQ(calibration_chart->series[1].points.size(), 10u);
  EXPECT_EQ(calibration_chart->series[1].points[0].x, 350.0);
  EXPECT_EQ(calibration_chart->series[1].points[0].y, 346.0);

  const ReportChart* inclusion = Chart(*section, "inclusion-chart");
  ASSERT_NE(inclusion, nullptr);
  EXPECT_EQ(inclusion->kind, ChartKind::kBars);
  ASSERT_EQ(inclusion->series[0].points.size(), validation_->bootstrap->inclusion.size());
  std::size_t chosen = 0;
  for (const ChartPoint& point : inclusion->series[0].points) chosen += point.css_class == "chosen" ? 1 : 0;
  EXPECT_EQ(chosen, (*audit_)["model"]["terms"].size()) << "the final model's terms are marked";
  const ReportChart* sizes = Chart(*section, "size-chart");
  ASSERT_NE(sizes, nullptr);
  ASSERT_EQ(sizes->series[0].points.size(), validation_->bootstrap->sizes.size());
  EXPECT_DOUBLE_EQ(sizes->series[0].points[1].x, 150.0 / 200.0);

  const ReportTable* models = Table(*section, "The most frequent final models");
  ASSERT_NE(models, nullptr);
  ASSERT_EQ(models->rows.size(), 2u);
  EXPECT_EQ(models->row_styles[0], "chosen");
  EXPECT_EQ(models->rows[0][0].text, "70.0%");

  const ReportTable* intervals = Table(*section, "Coefficient intervals");
  ASSERT_NE(intervals, nullptr);
  ASSERT_EQ(intervals->rows.size(), validation_->bootstrap->coefficients.size());
  const json& first = (*audit_)["model"]["coefficients"][0];
  EXPECT_EQ(intervals->rows[0][2].number, first["estimate"].get<double>() - 1.0);
  EXPECT_EQ(intervals->rows[0][6].number, first["ci_low"].get<double>()) << "the model's interval beside";
  EXPECT_NE(Table(*section, "Terms that stand in for each other"), nullptr);
}

TEST_F(ReportValidation, WithoutHoldoutOrBootstrapOnlyTheFoldsAreShown) {
  json audit = *audit_;
  audit["validation"].erase("holdout");
  audit["validation"].erase("bootstrap");
  const ReportModel model = BuildReportModel(audit, nullptr);
  const ReportSection* section = model.Find("validation");
  ASSERT_NE(section, nullptr);
  EXPECT_EQ(Chart(*section, "calibration-chart"), nullptr);
  EXPECT_EQ(Chart(*section, "inclusion-chart"), nullptr);
  EXPECT_NE(Table(*section, "Held-out error by fold"), nullptr);
}

TEST_F(ReportValidation, ABadSectionIsRefusedNamingTheKey) {
  json audit = *audit_;
  audit["validation"]["bootstrap"]["sizes"][0]["replicates"] = "many";
  try {
    BuildReportModel(audit, nullptr);
    FAIL() << "expected InputError";
  } catch (const InputError& error) {
    EXPECT_NE(std::string(error.what()).find("validation.bootstrap.sizes[0].replicates"), std::string::npos)
        << error.what();
  }
}

TEST_F(ReportValidation, TheHtmlDrawsTheChartsAndTheTextNamesThem) {
  if (!testing::PythonHasModules("html.parser")) GTEST_SKIP() << "Debian's python3 is not available";
  const std::string html = RenderHtmlReport(*audit_, nullptr);
  const auto path = folder_->Write("validation.html", html);
  const testing::HtmlReportCheck check = testing::CheckHtmlReport(path);
  ASSERT_TRUE(check.ran) << check.error;
  EXPECT_TRUE(check.problems.empty()) << check.problems.front();
  std::map<std::string, std::map<std::string, int>> charts;
  for (const auto& [css_class, points] : check.charts) charts[css_class] = points;
  ASSERT_TRUE(charts.count("chart calibration-chart"));
  EXPECT_EQ(charts["chart calibration-chart"]["calibration-point"], 10);
  ASSERT_TRUE(charts.count("chart inclusion-chart"));
  EXPECT_EQ(charts["chart inclusion-chart"]["bar"], static_cast<int>(validation_->bootstrap->inclusion.size()));
  EXPECT_EQ(charts["chart inclusion-chart"]["chosen"], static_cast<int>((*audit_)["model"]["terms"].size()));
  ASSERT_TRUE(charts.count("chart size-chart"));
  EXPECT_EQ(charts["chart size-chart"]["bar"], 3);
  EXPECT_NE(html.find("<polyline class=\"ref\""), std::string::npos) << "the identity line";
  EXPECT_NE(html.find("id=\"validation\""), std::string::npos);

  const std::string text = RenderTextReport(*audit_, nullptr);
  EXPECT_NE(text.find("5-fold RMSE (seed 1)"), std::string::npos);
  EXPECT_NE(text.find("Calibration on the held-out rows"), std::string::npos) << "the chart is named";
  EXPECT_NE(text.find("Coefficient intervals"), std::string::npos);
}

TEST_F(ReportValidation, TheReportWithValidationStillRendersInChromium) {
  const std::string html = RenderHtmlReport(*audit_, &made_->diagnostics);
  const auto path = folder_->Write("validation-screenshot.html", html);
  const std::string outcome = testing::ScreenshotIsNotBlank(path, folder_->path() / "validation.png");
  if (outcome.rfind("skip: ", 0) == 0) GTEST_SKIP() << outcome.substr(6);
  EXPECT_EQ(outcome, "");
}

}  // namespace
}  // namespace stepledger
