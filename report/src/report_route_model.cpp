// The route, the candidates of each step and all subsets, as report sections: for partial F
// each move's F test (F and p, −log10(p) on the charts against entry_p and exit_p), for the
// other criteria the criterion; moves worded "add age" / "remove cpu".

#include <cmath>

#include "report_internal.h"
#include "stepledger/engine/number_format.h"

namespace stepledger::report_detail {
namespace {

using V = ReportValue;

std::string PThresholdLabel(const char* name, std::optional<double> value) {
  return std::string(name) + " = " + FormatPValue(value);
}

void CandidateStep(const json& audit, const json& step, ReportSection& section) {
  const json& candidates = step["candidates"];
  const json& plan = Get(Get(audit, "plan"), "normalised");
  const std::string criterion = Text(Get(Get(audit, "search"), "criterion"));
  const bool p_rule = IsPValueRule(criterion);
  const std::string value_name = p_rule ? "−log10(p) of the partial F test" : CriterionName(criterion);
  const std::string heading = "Step " + Text(Get(step, "index")) + " (" + StepLabel(step) + "): " +
                              FormatCount(static_cast<std::int64_t>(candidates.size())) + " candidates";

  ReportTable table;
  table.caption = heading;
  table.folded = true;
  table.columns = {{"move", ValueKind::kText}, {"df", ValueKind::kCount}};
  if (!p_rule) table.columns.push_back({CriterionName(criterion), ValueKind::kCriterion});
  table.columns.insert(table.columns.end(),
                       {{"F", ValueKind::kStatistic}, {"p", ValueKind::kPValue}, {"status", ValueKind::kText}});
  ReportChart chart;
  chart.id = "candidate-chart";
  chart.kind = ChartKind::kDotRows;
  chart.title = heading;
  chart.x_label = value_name;
  ChartSeries series{"candidates", false, true, {}, {}};

  for (const json& candidate : candidates) {
    const std::string term = Text(Get(candidate, "term"));
    const std::string action = Text(Get(candidate, "action"));
    const std::string label = MoveLabel(action, term);
    const bool chosen = term == Text(Get(step, "term")) && action == Text(Get(step, "action"));
    const bool eligible = Get(candidate, "eligible") != false;
    const std::optional<double> f = Number(Get(candidate, "f"));
    const std::optional<double> p = Number(Get(candidate, "p"));
    const std::optional<double> score = Number(Get(candidate, "score"));
    const std::string status =
        !eligible ? "ineligible: " + Text(Get(candidate, "reason")) : (chosen ? "chosen" : "eligible");
    std::vector<ReportValue> row{V::Text(label), V::Count(Count(Get(candidate, "df")))};
    if (!p_rule) row.push_back(V::CriterionValue(criterion, score));
    row.insert(row.end(), {V::Statistic(f), V::PValue(p), V::Text(status)});
    table.rows.push_back(std::move(row));
    table.row_styles.push_back(!eligible ? "ineligible" : (chosen ? "chosen" : ""));

    const std::optional<double> value = p_rule ? MinusLog10(p) : score;
    std::string detail = label + ": ";
    if (!p_rule) detail += CriterionName(criterion) + " " + V::CriterionValue(criterion, score).text + ", ";
    detail += "F " + FormatStatistic(f) + ", " + PValueClause(p);
    ChartPoint point;
    point.label = label;
    point.x = value.value_or(0);
    point.defined = value.has_value();
    if (!value) {
      point.css_class = "candidate no-score";
      point.title = "no score: " + Text(Get(candidate, "reason"));
    } else if (!eligible) {
      point.css_class = "candidate ineligible";
      point.title = "ineligible: " + Text(Get(candidate, "reason")) + " (" + detail + ")";
    } else if (chosen) {
      point.css_class = "candidate chosen";
      point.title = "chosen: " + detail;
    } else {
      point.css_class = "candidate eligible";
      point.title = detail;
    }
    series.points.push_back(std::move(point));
  }

  if (p_rule) {
    const std::string action = Text(Get(step, "action"));
    const bool removing = action == "remove" || (!candidates.empty() && Text(Get(candidates[0], "action")) == "remove");
    const char* key = removing ? "exit_p" : "entry_p";
    const std::optional<double> threshold = Number(Get(plan, key));
    if (const auto height = MinusLog10(threshold)) {
      chart.references.push_back({true, *height, PThresholdLabel(key, threshold)});
      chart.x_include.push_back(*height);
    }
    chart.x_include.push_back(0);
    chart.caption = "◆ the move taken, ● other eligible moves, ○ dashed: not eligible (hover for the "
                    "reason), × no test. Right of the dashed line means p below the plan's " +
                    std::string(key) + "; p-values below 1e-16 are drawn at 16.";
  } else {
    std::optional<double> reference = Number(Get(step, "criterion_before"));
    if (!reference) reference = Number(Get(step, "criterion_value"));
    if (reference) {
      chart.references.push_back({true, *reference, "current model"});
      chart.x_include.push_back(*reference);
    }
    chart.caption = "◆ the move taken, ● other eligible moves, ○ dashed: not eligible (hover for the "
                    "reason), × no score. The dashed line is the model before the step; " +
                    std::string(HigherIsBetter(criterion) ? "right" : "left") + " of it is better.";
  }
  chart.series.push_back(std::move(series));
  section.blocks.push_back(std::move(chart));
  section.blocks.push_back(std::move(table));
}

}  // namespace

ReportSection RouteSection(const json& audit) {
  const json& steps = audit["steps"];
  const json& plan = Get(Get(audit, "plan"), "normalised");
  const std::string criterion = Text(Get(Get(audit, "search"), "criterion"));
  const bool p_rule = IsPValueRule(criterion);
  const std::string value_name = CriterionName(criterion);
  ReportSection section{"route", "The route", {}};

  ReportTable table;
  if (p_rule) {
    // Partial F decides by each move's F test: show F and p, not the residual mean square.
    table.columns = {{"step", ValueKind::kCount}, {"move", ValueKind::kText}, {"F", ValueKind::kStatistic},
                     {"p", ValueKind::kPValue},    {"rule", ValueKind::kText}};
  } else {
    table.columns = {{"step", ValueKind::kCount},
                     {"move", ValueKind::kText},
                     {value_name + " before", ValueKind::kCriterion},
                     {value_name + " after", ValueKind::kCriterion},
                     {"rule", ValueKind::kText}};
  }
  ReportChart chart;
  chart.id = "route-chart";
  chart.kind = ChartKind::kLine;
  chart.integer_x = true;
  chart.rotate_point_labels = true;
  chart.x_label = "step";
  ChartSeries series{"route", /*joined=*/true, /*markers=*/true, {}, {}};
  for (const json& step : steps) {
    const std::optional<std::int64_t> index = Count(Get(step, "index"));
    const std::string action = Text(Get(step, "action"));
    const std::string label = StepLabel(step);
    ChartPoint point;
    point.x = static_cast<double>(index.value_or(0));
    point.css_class = "route-point " + action;
    point.label = label;
    if (p_rule) {
      const std::optional<double> p = Number(Get(step, "p"));
      table.rows.push_back({V::Count(index), V::Text(label), V::Statistic(Number(Get(step, "f"))), V::PValue(p),
                            V::Text(Text(Get(step, "rule")))});
      const std::optional<double> height = MinusLog10(p);
      point.defined = height.has_value();
      point.y = height.value_or(0);
      point.title = "step " + FormatCount(index.value_or(0)) + ": " + label + ", F " +
                    FormatStatistic(Number(Get(step, "f"))) + ", " + PValueClause(p);
    } else {
      const std::optional<double> value = Number(Get(step, "criterion_value"));
      table.rows.push_back({V::Count(index), V::Text(label),
                            V::CriterionValue(criterion, Number(Get(step, "criterion_before"))),
                            V::CriterionValue(criterion, value), V::Text(Text(Get(step, "rule")))});
      point.defined = value.has_value();
      point.y = value.value_or(0);
      point.title = "step " + FormatCount(index.value_or(0)) + ": " + label + ", " + value_name + " " +
                    V::CriterionValue(criterion, value).text;
    }
    table.row_styles.push_back("");
    series.points.push_back(std::move(point));
  }
  section.blocks.push_back(std::move(table));
  if (steps.empty()) return section;
  if (p_rule) {
    chart.title = "Evidence of each move: −log10(p) by step";
    chart.y_label = "−log10(p) of the move's F test";
    chart.y_include = {0};
    for (const char* key : {"entry_p", "exit_p"}) {
      const std::optional<double> threshold = Number(Get(plan, key));
      if (const auto height = MinusLog10(threshold)) {
        chart.references.push_back({false, *height, PThresholdLabel(key, threshold)});
        chart.y_include.push_back(*height);
      }
    }
    chart.caption = "Higher means stronger evidence: 1 is p = 0.1, 2 is p = 0.01, 4 is p = 0.0001; p-values "
                    "below 1e-16 are drawn at 16. An addition needs a point above the entry_p line; a term "
                    "leaves while its point is below the exit_p line. Markers: ▲ added, ▼ removed; × no "
                    "test (start, stop).";
  } else {
    chart.title = value_name + " by step";
    chart.y_label = value_name;
    chart.caption = value_name + " of the model after each step (" +
                    (HigherIsBetter(criterion) ? "higher" : "lower") +
                    " is better). Markers: ▲ term added, ▼ term removed, ■ start, ◆ stop.";
  }
  chart.series.push_back(std::move(series));
  section.blocks.push_back(std::move(chart));
  return section;
}

ReportSection CandidatesSection(const json& audit) {
  ReportSection section{"candidates", "Candidates at each step", {}};
  for (const json& step : audit["steps"]) {
    if (!Get(step, "candidates").empty()) CandidateStep(audit, step, section);
  }
  if (section.blocks.empty()) {
    section.blocks.push_back(ReportParagraph{
        "No step of this route scored candidates one by one (all-subsets lists its models below).", ""});
  }
  return section;
}

std::optional<ReportSection> SubsetsSection(const json& audit) {
  if (!audit.contains("subsets")) return std::nullopt;
  const std::string criterion = Text(Get(Get(audit, "search"), "criterion"));
  const std::string value_name = CriterionName(criterion);
  const std::size_t final_size = Get(Get(audit, "model"), "terms").size();
  ReportSection section{"subsets", "All subsets: best " + value_name + " by model size", {}};
  const std::vector<SubsetBest> best = BestSubsetBySize(audit);
  if (!best.empty()) {
    ReportChart chart;
    chart.id = "subset-chart";
    chart.kind = ChartKind::kLine;
    chart.integer_x = true;
    chart.title = "Best " + value_name + " by number of terms";
    chart.x_label = "terms in the model (intercept not counted)";
    chart.y_label = value_name;
    chart.caption = "The best kept model of each size; ◆ marks the size of the final model. Hover a point "
                    "for its terms.";
    ChartSeries series{"best by size", true, true, {}, {}};
    for (const SubsetBest& entry : best) {
      const std::string terms = ModelTermsText(entry.terms);
      const bool chosen = static_cast<std::size_t>(entry.size) == final_size;
      ChartPoint point;
      point.x = static_cast<double>(entry.size);
      point.y = entry.score;
      point.css_class = chosen ? "subset-best chosen" : "subset-best";
      point.title = FormatCount(entry.size) + " terms: " + terms + "; " +
                    value_name + " " + V::CriterionValue(criterion, entry.score).text;
      series.points.push_back(std::move(point));
    }
    chart.series.push_back(std::move(series));
    section.blocks.push_back(std::move(chart));
  }
  ReportTable table;
  table.caption = "Every kept subset";
  table.columns = {{"size", ValueKind::kCount},
                   {"rank", ValueKind::kCount},
                   {"RSS", ValueKind::kQuantity},
                   {value_name, ValueKind::kCriterion},
                   {"terms", ValueKind::kText}};
  for (const json& subset : audit["subsets"]) {
    table.rows.push_back({V::Count(Count(Get(subset, "size"))), V::Count(Count(Get(subset, "rank"))),
                          V::Quantity(Number(Get(subset, "rss")), kCriterionDigits),
                          V::CriterionValue(criterion, Number(Get(subset, "score"))),
                          V::Text(JoinTerms(Get(subset, "terms")))});
  }
  section.blocks.push_back(std::move(table));
  return section;
}

}  // namespace stepledger::report_detail
