// The report model and its three back ends, on audits made by the real pipeline from the
// invented laptop data: one number, one text in every output; our own wording; partial-F
// routes shown by their F tests; diagnostics bounded whatever the number of rows; rows that
// stand out by Cook's distance. Expected texts come from engine/number_format.h applied to the
// audit's own numbers (the policy itself is tested in tests/engine/number_format_test.cpp);
// nothing here is a numeric reference.

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <sstream>
#include <limits>
#include <string>

#include "stepledger/engine/number_format.h"
#include "stepledger/report/report.h"
#include "support/audit_test_data.h"
#include "support/report_audits.h"
#include "support/test_paths.h"
#include "support/test_random.h"

namespace stepledger {
namespace {

using nlohmann::json;
using testing::ReportAudit;

std::string Escaped(std::string text) {
  std::string out;
  for (const char c : text) {
    switch (c) {
      case '&': out += "&amp;"; break;
      case '<': out += "&lt;"; break;
      case '>': out += "&gt;"; break;
      case '"': out += "&quot;"; break;
      case '\'': out += "&#39;"; break;
      default: out += c;
    }
  }
  return out;
}

const ReportFact* FindFact(const ReportModel& model, const std::string& section, const std::string& label) {
  const ReportSection* found = model.Find(section);
  if (found == nullptr) return nullptr;
  for (const ReportBlock& block : found->blocks) {
    if (const auto* facts = std::get_if<ReportFacts>(&block)) {
      for (const ReportFact& fact : facts->facts) {
        if (fact.label == label) return &fact;
      }
    }
  }
  return nullptr;
}

template <typename Block>
std::vector<const Block*> Blocks(const ReportModel& model, const std::string& section) {
  std::vector<const Block*> out;
  if (const ReportSection* found = model.Find(section)) {
    for (const ReportBlock& block : found->blocks) {
      if (const auto* typed = std::get_if<Block>(&block)) out.push_back(typed);
    }
  }
  return out;
}

// The line of a text report that starts (after its indent) with `start`.
std::string LineStartingWith(const std::string& text, const std::string& start) {
  std::istringstream lines(text);
  for (std::string line; std::getline(lines, line);) {
    const std::size_t first = line.find_first_not_of(' ');
    if (first != std::string::npos && line.compare(first, start.size(), start) == 0) return line;
  }
  return "";
}

class ReportModelTest : public ::testing::Test {
 protected:
  static void SetUpTestSuite() {
    folder_ = std::make_unique<testing::TempDir>();
    stepwise_ = std::make_unique<ReportAudit>(
        testing::MakeReportAudit(*folder_, "stepwise", testing::LaptopCsv(), testing::HierarchyLaptopPlan()));
    json plan = json::parse(testing::LaptopPlan("stepwise", "partial-f"));
    plan["entry_p"] = 0.05;
    plan["exit_p"] = 0.10;
    partial_ = std::make_unique<ReportAudit>(testing::MakeReportAudit(*folder_, "partial", testing::LaptopCsv(), plan.dump()));
  }
  static void TearDownTestSuite() {
    stepwise_.reset();
    partial_.reset();
    folder_.reset();
  }
  static std::unique_ptr<testing::TempDir> folder_;
  static std::unique_ptr<ReportAudit> stepwise_, partial_;
};

std::unique_ptr<testing::TempDir> ReportModelTest::folder_;
std::unique_ptr<ReportAudit> ReportModelTest::stepwise_, ReportModelTest::partial_;

TEST_F(ReportModelTest, SamePValueEstimateAndCriterionTextInTextAndHtml) {
  const json& audit = stepwise_->audit;
  const ReportModel model = BuildReportModel(audit, &stepwise_->diagnostics);
  const std::string text = RenderTextReport(model);
  const std::string html = RenderHtmlReport(model);
  ASSERT_EQ(text, RenderTextReport(audit, &stepwise_->diagnostics));  // the convenience entry point agrees

  // An estimate of the final model, and a p-value above the floor (so that its digits show):
  // the first candidate of the route with one (the final model's are all below the floor).
  const json& chosen = audit["model"]["coefficients"].back();
  const std::string name = chosen["name"].get<std::string>();
  const std::string estimate_text = FormatQuantity(chosen["estimate"].get<double>(), 6);
  const std::string criterion_text = FormatQuantity(audit["search"]["final_criterion_value"].get<double>(), 6);
  std::string move;
  double p_value = 0;
  for (const json& step : audit["steps"]) {
    for (const json& candidate : step["candidates"]) {
      if (move.empty() && candidate["p"].is_number() && candidate["p"].get<double>() >= 10 * kPValueFloor) {
        move = candidate["action"].get<std::string>() + " " + candidate["term"].get<std::string>();
        p_value = candidate["p"].get<double>();
      }
    }
  }
  ASSERT_FALSE(move.empty()) << "the invented data's noise columns give some candidate p >= 0.001";
  const std::string p_text = FormatPValue(p_value);

  // Text and HTML list the steps in the same order: the first row of that move is the same row.
  const std::string text_candidate = LineStartingWith(text, move + " ");
  EXPECT_NE(text_candidate.find(" " + p_text + " "), std::string::npos) << text_candidate;
  const std::size_t html_candidate = html.find("<tr><td>" + Escaped(move) + "</td>");
  ASSERT_NE(html_candidate, std::string::npos) << move;
  EXPECT_NE(html.substr(html_candidate, html.find("</tr>", html_candidate) - html_candidate)
                .find("<td class=\"num\">" + Escaped(p_text) + "</td>"),
            std::string::npos);

  const std::string text_row = LineStartingWith(text.substr(text.find("Coefficients (")), name + " ");
  ASSERT_FALSE(text_row.empty()) << name;
  EXPECT_NE(text_row.find(" " + estimate_text + " "), std::string::npos) << text_row;
  const std::string html_row_start = "<tr><td>" + Escaped(name) + "</td>";
  const std::size_t html_row = html.find(html_row_start, html.find("<section id=\"model\""));
  ASSERT_NE(html_row, std::string::npos) << name;
  const std::string html_row_text = html.substr(html_row, html.find("</tr>", html_row) - html_row);
  EXPECT_NE(html_row_text.find("<td class=\"num\">" + Escaped(estimate_text) + "</td>"), std::string::npos);
  const std::string coefficient_p = FormatPValue(chosen["p"].get<double>());
  EXPECT_NE(text_row.find(" " + coefficient_p + " "), std::string::npos) << text_row;
  EXPECT_NE(html_row_text.find("<td class=\"num\">" + Escaped(coefficient_p) + "</td>"), std::string::npos);

  EXPECT_NE(LineStartingWith(text, "BIC:").find(criterion_text), std::string::npos) << text;
  EXPECT_NE(html.find("<dt>BIC</dt><dd>" + Escaped(criterion_text) + "</dd>"), std::string::npos);

  // The JSON back end keeps the full-precision number beside the same text.
  const json report = RenderJsonReport(model);
  bool found = false;
  for (const json& section : report["sections"]) {
    if (section["id"] != "model") continue;
    for (const json& block : section["blocks"]) {
      if (block["type"] != "table" || block["columns"][0]["heading"] != "coefficient") continue;
      for (const json& row : block["rows"]) {
        if (row["cells"][0]["text"] != name) continue;
        found = true;
        EXPECT_EQ(row["cells"][5]["kind"], "p-value");
        // The text has the floor; the number is the exact p-value.
        EXPECT_EQ(row["cells"][5]["text"], coefficient_p);
        EXPECT_EQ(row["cells"][5]["number"].get<double>(), chosen["p"].get<double>());
        EXPECT_EQ(row["cells"][2]["number"].get<double>(), chosen["estimate"].get<double>());
      }
    }
  }
  EXPECT_TRUE(found);
}

TEST_F(ReportModelTest, OurWordingForMovesTheModelAndTheFTest) {
  const json& audit = stepwise_->audit;
  const std::string text = RenderTextReport(audit, nullptr);
  const std::string html = RenderHtmlReport(audit, nullptr);
  for (const json& step : audit["steps"]) {
    if (step["action"] != "add" && step["action"] != "remove") continue;
    const std::string term = step["term"].get<std::string>();
    const std::string label = step["action"].get<std::string>() + " " + term;
    EXPECT_NE(text.find("  " + label + " "), std::string::npos) << label;
    EXPECT_NE(html.find("<td>" + Escaped(label) + "</td>"), std::string::npos) << label;
    EXPECT_EQ(text.find("+ " + term), std::string::npos) << term;
    EXPECT_EQ(text.find("- " + term + " "), std::string::npos) << term;
  }
  // The model stated in words, with no formula mark.
  std::string terms;
  for (const json& term : audit["model"]["terms"]) terms += (terms.empty() ? "" : ", ") + term.get<std::string>();
  EXPECT_NE(text.find("price explained by " + terms), std::string::npos) << text;
  EXPECT_EQ(text.find(" ~ "), std::string::npos);
  EXPECT_EQ(html.find(" ~ "), std::string::npos);
  // The overall F test in APA style.
  const json& model = audit["model"];
  const std::string f_line =
      FormatFTest(model["f"].get<double>(), model["anova"]["regression"]["df"].get<std::int64_t>(),
                  model["df_residual"].get<std::int64_t>(), model["f_p"].get<double>());
  EXPECT_EQ(f_line.rfind("F(", 0), 0u);
  EXPECT_NE(text.find("Overall F test:"), std::string::npos);
  EXPECT_NE(LineStartingWith(text, "Overall F test:").find(f_line), std::string::npos) << text;
  EXPECT_NE(html.find("<dd>" + Escaped(f_line) + "</dd>"), std::string::npos);
}

TEST_F(ReportModelTest, WeightsAndLogResponseAreStatedWithTheModel) {
  json audit = stepwise_->audit;
  audit["design"]["response_transform"] = "log";
  audit["design"]["weights"] = "units";
  const ReportModel model = BuildReportModel(audit, nullptr);
  const ReportFact* statement = FindFact(model, "summary", "Model");  // model outlives it
  ASSERT_NE(statement, nullptr);
  EXPECT_EQ(statement->value.text.rfind("log(price) explained by ", 0), 0u) << statement->value.text;
  EXPECT_NE(statement->value.text.find(", weighted by units"), std::string::npos) << statement->value.text;
}

// A count beyond int64 (a hostile audit's 2^64 - 1) must not wrap to a negative count: it is
// shown as not available. Negative counts are no counts either.
TEST_F(ReportModelTest, CountsBeyondInt64AreNotShownAsNegative) {
  json audit = stepwise_->audit;
  audit["data"]["rows_used"] = std::numeric_limits<std::uint64_t>::max();
  audit["data"]["rows_read"] = std::uint64_t{1} << 63;
  audit["model"]["n"] = std::numeric_limits<std::uint64_t>::max();
  const ReportModel model = BuildReportModel(audit, nullptr);
  const std::string text = RenderTextReport(model);
  EXPECT_EQ(text.find("-9,223"), std::string::npos) << text;
  EXPECT_EQ(text.find("used -"), std::string::npos) << text;
  const ReportFact* used = FindFact(model, "data", "Rows used");
  ASSERT_NE(used, nullptr);
  EXPECT_EQ(used->value.text, "n/a");
  const ReportFact* read = FindFact(model, "data", "Rows read");
  ASSERT_NE(read, nullptr);
  EXPECT_EQ(read->value.text, "n/a");
}

TEST_F(ReportModelTest, RegressionSumOfSquaresReadsTheNewKeyAndFallsBackToTheOld) {
  json audit = stepwise_->audit;
  audit["model"].erase("ssr");
  audit["model"]["ss_regression"] = 123456.5;
  const ReportModel new_key = BuildReportModel(audit, nullptr);
  const ReportFact* fact = FindFact(new_key, "model", "Regression sum of squares");
  ASSERT_NE(fact, nullptr);
  EXPECT_EQ(fact->value.text, FormatQuantity(123456.5, 6));
  audit["model"].erase("ss_regression");
  audit["model"]["ssr"] = 654321.25;
  const ReportModel old_key = BuildReportModel(audit, nullptr);
  fact = FindFact(old_key, "model", "Regression sum of squares");
  ASSERT_NE(fact, nullptr);
  EXPECT_EQ(fact->value.text, FormatQuantity(654321.25, 6));
}

TEST_F(ReportModelTest, PartialFRouteShowsEachStepsFAndPOnAMinusLog10Axis) {
  const json& audit = partial_->audit;
  ASSERT_EQ(audit["search"]["criterion"], "partial-f");
  const ReportModel model = BuildReportModel(audit, nullptr);
  const auto tables = Blocks<ReportTable>(model, "route");
  ASSERT_EQ(tables.size(), 1u);
  std::vector<std::string> headings;
  for (const ReportColumn& column : tables[0]->columns) headings.push_back(column.heading);
  EXPECT_EQ(headings, (std::vector<std::string>{"step", "move", "F", "p", "rule"}));
  int moves = 0;
  for (std::size_t index = 0; index < audit["steps"].size(); ++index) {
    const json& step = audit["steps"][index];
    if (!step["p"].is_number()) continue;
    ++moves;
    EXPECT_EQ(tables[0]->rows[index][2].text, FormatStatistic(step["f"].get<double>()));
    EXPECT_EQ(tables[0]->rows[index][3].text, FormatPValue(step["p"].get<double>()));
  }
  ASSERT_GT(moves, 0);
  const auto charts = Blocks<ReportChart>(model, "route");
  ASSERT_EQ(charts.size(), 1u);
  EXPECT_NE(charts[0]->y_label.find("−log10(p)"), std::string::npos);
  for (std::size_t index = 0; index < audit["steps"].size(); ++index) {
    const json& step = audit["steps"][index];
    const ChartPoint& point = charts[0]->series.front().points[index];
    if (step["p"].is_number()) {
      // Capped at 16 (p below 1e-16, an underflow to 0 included).
      const double p = step["p"].get<double>();
      EXPECT_TRUE(point.defined) << index;
      EXPECT_NEAR(point.y, p > 0 ? std::min(16.0, -std::log10(p)) : 16.0, 1e-12) << index;
    } else {
      EXPECT_FALSE(point.defined);
    }
  }
  // A p-value that underflowed to 0 is the strongest evidence, not a missing test.
  json underflow = audit;
  for (json& step : underflow["steps"]) {
    if (step["p"].is_number()) step["p"] = 0.0;
  }
  const ReportModel underflow_model = BuildReportModel(underflow, nullptr);
  for (const ChartPoint& point : Blocks<ReportChart>(underflow_model, "route")[0]->series.front().points) {
    if (point.css_class.find("add") != std::string::npos) {
      EXPECT_TRUE(point.defined);
      EXPECT_EQ(point.y, 16.0);
    }
  }
  // The entry_p line at -log10(0.05).
  bool entry_line = false;
  for (const ReferenceLine& line : charts[0]->references) {
    entry_line = entry_line || (line.label == "entry_p = 0.0500" && std::abs(line.value + std::log10(0.05)) < 1e-12);
  }
  EXPECT_TRUE(entry_line);
  const std::string text = RenderTextReport(model);
  EXPECT_EQ(text.find("residual mean square"), std::string::npos);
  EXPECT_EQ(text.find("res. mean sq."), std::string::npos);
}

TEST_F(ReportModelTest, OutcomeNamesTheRuleThatStoppedTheSearch) {
  json audit = partial_->audit;
  const std::string rule = audit["search"]["stop_rule"].get<std::string>();
  const ReportModel partial_model = BuildReportModel(audit, nullptr);
  const ReportFact* outcome = FindFact(partial_model, "summary", "Outcome");
  ASSERT_NE(outcome, nullptr);
  if (audit["search"]["outcome"] == "stopped-no-improvement") {
    const std::string threshold = rule.rfind("exit p-value", 0) == 0 ? "exit_p" : "entry_p";
    EXPECT_NE(outcome->value.text.find(threshold), std::string::npos) << outcome->value.text << " / " << rule;
  }
  // Both thresholds, whichever the invented data reach.
  audit["search"]["outcome"] = "stopped-no-improvement";
  audit["search"]["stop_rule"] = "exit p-value of ram 0.3 > exit_p 0.1";
  const ReportModel exit_model = BuildReportModel(audit, nullptr);
  EXPECT_EQ(FindFact(exit_model, "summary", "Outcome")->value.text,
            "stopped at exit_p: no term's p-value is above exit_p");
  audit["search"]["stop_rule"] = "entry p-value of disk 0.4 >= entry_p 0.05";
  const ReportModel entry_model = BuildReportModel(audit, nullptr);
  EXPECT_EQ(FindFact(entry_model, "summary", "Outcome")->value.text,
            "stopped at entry_p: no candidate's p-value is below entry_p");
  // A score criterion names its criterion, not a threshold.
  const ReportModel bic_model = BuildReportModel(stepwise_->audit, nullptr);
  const ReportFact* bic = FindFact(bic_model, "summary", "Outcome");
  if (stepwise_->audit["search"]["outcome"] == "stopped-no-improvement") {
    EXPECT_EQ(bic->value.text, "stopped: no move improves BIC");
  }
}

TEST_F(ReportModelTest, RowsThatStandOutAreSortedByCooksDistanceLargestFirst) {
  const ReportDiagnostics& diagnostics = stepwise_->diagnostics;
  ReportOptions options;
  options.max_outlier_rows = 1000;
  const ReportModel model = BuildReportModel(stepwise_->audit, &diagnostics, options);
  const auto tables = Blocks<ReportTable>(model, "diagnostics");
  ASSERT_EQ(tables.size(), 1u);
  const ReportTable& table = *tables[0];
  ASSERT_EQ(table.columns[5].heading, "Cook's D");
  ASSERT_GE(table.rows.size(), 3u);
  // The rows that stand out among the largest of each measure, counted by brute force; the
  // count of all of them is stated, the rest are "not listed".
  const testing::DiagnosticsCounts counts = testing::CountDiagnostics(stepwise_->rows, diagnostics.k, 1000);
  EXPECT_EQ(static_cast<int>(table.rows.size()), counts.stand_out);
  EXPECT_EQ(static_cast<int>(diagnostics.result.stand_out), counts.stand_out_total);
  EXPECT_EQ(static_cast<int>(table.rows.size() + table.rows_not_listed), counts.stand_out_total);
  double largest = 0;
  for (const RowDiagnostic& row : stepwise_->rows) largest = std::max(largest, row.cooks_distance.value_or(0));
  EXPECT_EQ(*table.rows[0][5].number, largest);
  for (std::size_t index = 1; index < table.rows.size(); ++index) {
    EXPECT_GE(*table.rows[index - 1][5].number, *table.rows[index][5].number) << index;
  }
}

TEST_F(ReportModelTest, StandOutCsvIsEveryRowThatStandsOutInFileOrderAtFullPrecision) {
  std::string csv;
  const ReportDiagnostics diagnostics = DiagnoseAuditRows(stepwise_->audit, stepwise_->data, "audit.json",
                                                          [&csv](std::string_view text) { csv += text; });
  const StandOutThresholds& thresholds = diagnostics.result.thresholds;
  std::vector<const RowDiagnostic*> expected;
  for (const RowDiagnostic& row : stepwise_->rows) {
    if (thresholds.StandsOut(row)) expected.push_back(&row);
  }
  ASSERT_GE(expected.size(), 3u);
  std::istringstream lines(csv);
  std::string line;
  std::getline(lines, line);
  EXPECT_EQ(line + "\n", kStandOutCsvHeader);
  std::size_t index = 0;
  while (std::getline(lines, line)) {
    ASSERT_LT(index, expected.size());
    const RowDiagnostic& row = *expected[index];
    EXPECT_EQ(line + "\n", StandOutRowCsv(row, thresholds));
    std::vector<std::string> fields;
    std::stringstream split(line);
    for (std::string field; std::getline(split, field, ',');) fields.push_back(field);
    ASSERT_GE(fields.size(), 7u);
    EXPECT_EQ(fields[0], std::to_string(row.line));
    EXPECT_EQ(std::stod(fields[5]), *row.cooks_distance);  // shortest round trip reads back exactly
    ++index;
  }
  EXPECT_EQ(index, expected.size());
  EXPECT_EQ(index, diagnostics.result.stand_out);
}

// Diagnostics of n invented rows (a simulation, not data): fitted uniform, residuals normal,
// leverage near k/n with a few high ones, Cook's distance by its formula r^2 h / (k (1 - h)),
// folded one by one as the diagnostics pass folds them.
ReportDiagnostics InventedDiagnostics(std::size_t n, std::uint64_t seed) {
  testing::TestRandom random(seed);
  ReportDiagnostics diagnostics;
  diagnostics.k = 8;
  diagnostics.sigma = 30;
  DiagnosticsAccumulator accumulator(StandOutThresholds::CommonPractice(n, 8));
  for (std::size_t index = 0; index < n; ++index) {
    RowDiagnostic row;
    row.row_index = index;
    row.line = index + 2;
    row.fitted = random.Uniform(500, 1500);
    const double r = random.Normal() * (index % 97 == 0 ? 4 : 1);
    const double h = 8.0 / static_cast<double>(n) * random.Uniform(0.2, index % 89 == 0 ? 6 : 1.8);
    row.leverage = h;
    row.standardized_residual = r;
    row.residual = r * 30 * std::sqrt(1 - h);
    row.cooks_distance = r * r * h / (8 * (1 - h));
    accumulator.Add(row);
  }
  diagnostics.result = accumulator.Finish();
  return diagnostics;
}

TEST_F(ReportModelTest, HtmlSizeDoesNotGrowWithTheRowsDiagnosed) {
  const ReportDiagnostics small = InventedDiagnostics(2000, 11);
  const ReportDiagnostics large = InventedDiagnostics(200000, 12);
  const std::string small_html = RenderHtmlReport(stepwise_->audit, &small);
  const std::string large_html = RenderHtmlReport(stepwise_->audit, &large);
  const std::string small_text = RenderTextReport(stepwise_->audit, &small);
  const std::string large_text = RenderTextReport(stepwise_->audit, &large);
  RecordProperty("html_bytes_2000_rows", static_cast<int>(small_html.size()));
  RecordProperty("html_bytes_200000_rows", static_cast<int>(large_html.size()));
  const double html_difference = std::abs(static_cast<double>(large_html.size()) - static_cast<double>(small_html.size()));
  // The bound: what fills in with more rows is at most the density grid's 48 x 28 cells (about
  // 140 bytes each with its hover text) and the points of the bounded lists, never a row per
  // row (three points per row would be about 150 bytes per row: 30 MB more here).
  EXPECT_LT(html_difference, 48 * 28 * 140.0) << small_html.size() << " vs " << large_html.size();
  EXPECT_LT(large_html.size(), 1200000u);
  EXPECT_LT(std::abs(static_cast<double>(large_text.size()) - static_cast<double>(small_text.size())), 2000.0);
  // The caps are stated: the large run has more flagged rows than are drawn.
  EXPECT_NE(large_html.find("more such rows are not drawn"), std::string::npos);
}

TEST_F(ReportModelTest, AnUnverifiedAuditOpensEveryOutputWithTheWarning) {
  ReportOptions options;
  options.integrity_problems = {"key 'model' does not match its digest: it was edited"};
  const ReportModel model = BuildReportModel(stepwise_->audit, nullptr, options);
  EXPECT_FALSE(model.verified);
  const std::string text = RenderTextReport(model);
  EXPECT_EQ(text.rfind("!! WARNING: this audit does not verify", 0), 0u) << text.substr(0, 200);
  EXPECT_NE(text.find("!! key 'model' does not match its digest"), std::string::npos);
  const std::string html = RenderHtmlReport(model);
  const std::size_t warning = html.find("<section id=\"unverified\"");
  ASSERT_NE(warning, std::string::npos);
  EXPECT_LT(warning, html.find("<header>"));
  EXPECT_LT(html.find("<main>"), warning);
  const json report = RenderJsonReport(model);
  EXPECT_EQ(report["verified"], false);
  EXPECT_EQ(report["warning"][1], options.integrity_problems[0]);
  EXPECT_EQ(RenderJsonReport(BuildReportModel(stepwise_->audit, nullptr))["verified"], true);
  EXPECT_EQ(RenderTextReport(stepwise_->audit, nullptr).find("WARNING"), std::string::npos);
}

}  // namespace
}  // namespace stepledger
