// BuildReportModel: reads the audit once and formats every number once (engine/number_format.h),
// so that the text, HTML and JSON back ends show the same text for the same number.

#include <algorithm>
#include <cmath>

#include "report_internal.h"
#include "stepledger/engine/number_format.h"

namespace stepledger {

const char* ToString(ValueKind kind) {
  switch (kind) {
    case ValueKind::kText: return "text";
    case ValueKind::kCount: return "count";
    case ValueKind::kQuantity: return "quantity";
    case ValueKind::kStatistic: return "statistic";
    case ValueKind::kPValue: return "p-value";
    case ValueKind::kPercent: return "percent";
  }
  return "text";
}

ReportValue ReportValue::Text(std::string text) { return {ValueKind::kText, std::nullopt, std::move(text)}; }

ReportValue ReportValue::Count(std::optional<std::int64_t> count) {
  if (!count) return {ValueKind::kCount, std::nullopt, "n/a"};
  return {ValueKind::kCount, static_cast<double>(*count), FormatCount(*count)};
}

namespace {
std::optional<double> Finite(std::optional<double> value) {
  return value && std::isfinite(*value) ? value : std::nullopt;
}
}  // namespace

ReportValue ReportValue::Quantity(std::optional<double> value, int significant) {
  return {ValueKind::kQuantity, Finite(value), FormatQuantity(value, significant)};
}
ReportValue ReportValue::Statistic(std::optional<double> value) {
  return {ValueKind::kStatistic, Finite(value), FormatStatistic(value)};
}
ReportValue ReportValue::PValue(std::optional<double> value) {
  // The exact value is kept (subnormals included): only the text has the floor.
  return {ValueKind::kPValue, value, FormatPValue(value)};
}
ReportValue ReportValue::Percent(std::optional<double> share) {
  return {ValueKind::kPercent, Finite(share), FormatPercent(share)};
}

const ReportSection* ReportModel::Find(std::string_view id) const {
  for (const ReportSection& section : sections) {
    if (section.id == id) return &section;
  }
  return nullptr;
}

namespace report_detail {
namespace {

using V = ReportValue;

// Criteria and estimates keep six significant digits: successive steps of a route often differ
// in the fifth.
constexpr int kCriterionDigits = 6;

std::optional<double> MinusLog10(std::optional<double> p) {
  if (!p || !(*p > 0)) return std::nullopt;
  return -std::log10(*p);
}

ReportFacts Facts(std::vector<ReportFact> facts) { return ReportFacts{std::move(facts)}; }

ReportSection Summary(const json& audit) {
  const json& model = Get(audit, "model");
  const json& search = Get(audit, "search");
  const std::string criterion = Text(Get(search, "criterion"));
  const json& anova = Get(model, "anova");
  const std::optional<std::int64_t> df_model = Count(Get(Get(anova, "regression"), "df"));
  const std::optional<std::int64_t> df_residual = Count(Get(model, "df_residual"));
  std::vector<ReportFact> facts{
      {"Model", V::Text(ModelStatement(audit))},
      {"Rows used", V::Count(Count(Get(model, "n")))},
      {"Coefficients", V::Count(Count(Get(model, "k")))},
      {"R²", V::Quantity(Number(Get(model, "r2")))},
      {"Adjusted R²", V::Quantity(Number(Get(model, "adj_r2")))},
      {"Residual SD (" + ResponseLabel(audit) + ")", V::Quantity(Number(Get(model, "sigma")))},
      {"Overall F test", V{ValueKind::kText, Number(Get(model, "f")),
                           FormatFTest(Number(Get(model, "f")), df_model.value_or(0), df_residual.value_or(0),
                                       Number(Get(model, "f_p")))}},
  };
  facts.push_back({IsPValueRule(criterion) ? "Residual mean square" : CriterionName(criterion),
                   V::Quantity(Number(Get(search, "final_criterion_value")), kCriterionDigits)});
  facts.push_back({"Outcome", V::Text(OutcomeInWords(audit))});
  facts.push_back({"Stop rule", V::Text(Text(Get(search, "stop_rule")))});
  return {"summary", "Summary", {Facts(std::move(facts))}};
}

ReportSection Cautions(const json& audit) {
  ReportList list;
  list.style = "cautions";
  const json& cautions = Get(audit, "cautions");
  if (cautions.empty()) list.items.push_back({"", "No caution was recorded in this audit."});
  for (const json& caution : cautions) {
    if (caution.is_object()) {
      list.items.push_back({Text(Get(caution, "kind")), Text(Get(caution, "message"))});
    } else {
      list.items.push_back({"", Text(caution)});
    }
  }
  return {"cautions", "Cautions for this run", {std::move(list)}};
}

ReportSection Plan(const json& audit) {
  ReportSection section{"plan", "The plan", {}};
  ReportList sentences;
  for (std::string& sentence : PlanSentences(audit)) sentences.items.push_back({"", std::move(sentence)});
  section.blocks.push_back(std::move(sentences));
  ReportTable terms;
  terms.caption = "Candidate terms";
  terms.columns = {{"term", ValueKind::kText}, {"definition", ValueKind::kText}};
  for (auto& [name, definition] : TermDefinitions(audit)) {
    terms.rows.push_back({V::Text(name), V::Text(definition)});
  }
  if (!terms.rows.empty()) section.blocks.push_back(std::move(terms));
  for (const json& skipped : Get(Get(audit, "design"), "skipped")) {
    section.blocks.push_back(ReportParagraph{
        "Skipped term " + Text(Get(skipped, "term")) + ": " + Text(Get(skipped, "reason")), ""});
  }
  return section;
}

ReportSection Data(const json& audit, const ReportOptions& options) {
  const json& data = Get(audit, "data");
  ReportSection section{"data", "Data and row accounting", {}};
  section.blocks.push_back(Facts({{"File", V::Text(Text(Get(data, "file")))},
                                  {"Bytes", V::Count(Count(Get(data, "bytes")))},
                                  {"SHA-256", V::Text(Text(Get(data, "sha256")))},
                                  {"Rows read", V::Count(Count(Get(data, "rows_read")))},
                                  {"Rows used", V::Count(Count(Get(data, "rows_used")))}}));
  ReportTable dropped;
  dropped.caption = "Rows dropped, by reason";
  dropped.columns = {{"reason", ValueKind::kText}, {"column", ValueKind::kText}, {"rows", ValueKind::kCount}};
  const json& rows_dropped = Get(data, "rows_dropped");
  if (rows_dropped.is_array()) {  // [{reason, column, rows}]
    for (const json& entry : rows_dropped) {
      dropped.rows.push_back({V::Text(Text(Get(entry, "reason"))), V::Text(Text(Get(entry, "column"))),
                              V::Count(Count(Get(entry, "rows")))});
    }
  } else if (rows_dropped.is_object()) {  // {reason: rows}
    for (const auto& [reason, count] : rows_dropped.items()) {
      dropped.rows.push_back({V::Text(reason), V::Text(""), V::Count(Count(count))});
    }
  }
  if (dropped.rows.empty()) {
    section.blocks.push_back(ReportParagraph{"No rows dropped.", ""});
  } else {
    section.blocks.push_back(std::move(dropped));
  }
  ReportTable columns;
  columns.caption = "Columns";
  columns.columns = {{"column", ValueKind::kText},    {"type", ValueKind::kText},
                     {"present", ValueKind::kCount},  {"missing", ValueKind::kCount},
                     {"min", ValueKind::kQuantity},   {"max", ValueKind::kQuantity},
                     {"mean", ValueKind::kQuantity},  {"SD", ValueKind::kQuantity},
                     {"levels", ValueKind::kText}};
  for (const json& column : Get(data, "columns")) {
    columns.rows.push_back({V::Text(Text(Get(column, "name"))), V::Text(Text(Get(column, "type"))),
                            V::Count(Count(Get(column, "present"))), V::Count(Count(Get(column, "missing"))),
                            V::Quantity(Number(Get(column, "min"))), V::Quantity(Number(Get(column, "max"))),
                            V::Quantity(Number(Get(column, "mean"))), V::Quantity(Number(Get(column, "sd"))),
                            V::Text(LevelsSummary(column, options.max_levels_listed, /*with_counts=*/true))});
  }
  if (!columns.rows.empty()) section.blocks.push_back(std::move(columns));
  return section;
}

std::string PThresholdLabel(const char* name, std::optional<double> value) {
  return std::string(name) + " = " + FormatPValue(value);
}

ReportSection Route(const json& audit) {
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
                     {value_name + " before", ValueKind::kQuantity},
                     {value_name + " after", ValueKind::kQuantity},
                     {"rule", ValueKind::kText}};
  }
  ReportChart chart;
  chart.id = "route-chart";
  chart.kind = ChartKind::kLine;
  chart.integer_x = true;
  chart.rotate_point_labels = true;
  chart.x_label = "step";
  ChartSeries series{"route", /*joined=*/true, /*markers=*/true, {}};
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
                            V::Quantity(Number(Get(step, "criterion_before")), kCriterionDigits),
                            V::Quantity(value, kCriterionDigits), V::Text(Text(Get(step, "rule")))});
      point.defined = value.has_value();
      point.y = value.value_or(0);
      point.title = "step " + FormatCount(index.value_or(0)) + ": " + label + ", " + value_name + " " +
                    FormatQuantity(value, kCriterionDigits);
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
    chart.caption = "Higher means stronger evidence: 1 is p = 0.1, 2 is p = 0.01, 4 is p = 0.0001. An "
                    "addition needs a point above the entry_p line; a term leaves while its point is "
                    "below the exit_p line. Markers: ▲ added, ▼ removed; × no test (start, stop).";
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
  if (!p_rule) table.columns.push_back({CriterionName(criterion), ValueKind::kQuantity});
  table.columns.insert(table.columns.end(),
                       {{"F", ValueKind::kStatistic}, {"p", ValueKind::kPValue}, {"status", ValueKind::kText}});
  ReportChart chart;
  chart.id = "candidate-chart";
  chart.kind = ChartKind::kDotRows;
  chart.title = heading;
  chart.x_label = value_name;
  ChartSeries series{"candidates", false, true, {}};

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
    if (!p_rule) row.push_back(V::Quantity(score, kCriterionDigits));
    row.insert(row.end(), {V::Statistic(f), V::PValue(p), V::Text(status)});
    table.rows.push_back(std::move(row));
    table.row_styles.push_back(!eligible ? "ineligible" : (chosen ? "chosen" : ""));

    const std::optional<double> value = p_rule ? MinusLog10(p) : score;
    std::string detail = label + ": ";
    if (!p_rule) detail += CriterionName(criterion) + " " + FormatQuantity(score, kCriterionDigits) + ", ";
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
                    std::string(key) + ".";
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

ReportSection Candidates(const json& audit) {
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

std::optional<ReportSection> Subsets(const json& audit) {
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
    ChartSeries series{"best by size", true, true, {}};
    for (const SubsetBest& entry : best) {
      std::string terms;
      for (const std::string& term : entry.terms) terms += (terms.empty() ? "" : ", ") + term;
      const bool chosen = static_cast<std::size_t>(entry.size) == final_size;
      ChartPoint point;
      point.x = static_cast<double>(entry.size);
      point.y = entry.score;
      point.css_class = chosen ? "subset-best chosen" : "subset-best";
      point.title = FormatCount(entry.size) + " terms: " + (terms.empty() ? "(intercept only)" : terms) + "; " +
                    value_name + " " + FormatQuantity(entry.score, kCriterionDigits);
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
                   {value_name, ValueKind::kQuantity},
                   {"terms", ValueKind::kText}};
  for (const json& subset : audit["subsets"]) {
    table.rows.push_back({V::Count(Count(Get(subset, "size"))), V::Count(Count(Get(subset, "rank"))),
                          V::Quantity(Number(Get(subset, "rss")), kCriterionDigits),
                          V::Quantity(Number(Get(subset, "score")), kCriterionDigits),
                          V::Text(JoinTerms(Get(subset, "terms")))});
  }
  section.blocks.push_back(std::move(table));
  return section;
}

ReportSection FinalModel(const json& audit) {
  const json& model = Get(audit, "model");
  const json& anova = Get(model, "anova");
  ReportSection section{"model", "The final model", {}};
  const std::optional<std::int64_t> df_model = Count(Get(Get(anova, "regression"), "df"));
  const std::optional<std::int64_t> df_residual = Count(Get(model, "df_residual"));
  // The model JSON names the regression sum of squares ss_regression (older audits: ssr).
  const json& ss_regression = Get(model, "ss_regression").is_null() ? Get(model, "ssr") : Get(model, "ss_regression");
  section.blocks.push_back(Facts({
      {"Model", V::Text(ModelStatement(audit))},
      {"Overall F test", V{ValueKind::kText, Number(Get(model, "f")),
                           FormatFTest(Number(Get(model, "f")), df_model.value_or(0), df_residual.value_or(0),
                                       Number(Get(model, "f_p")))}},
      {"AIC", V::Quantity(Number(Get(model, "aic")), kCriterionDigits)},
      {"BIC", V::Quantity(Number(Get(model, "bic")), kCriterionDigits)},
      {"Residual sum of squares", V::Quantity(Number(Get(model, "rss")), kCriterionDigits)},
      {"Regression sum of squares", V::Quantity(Number(ss_regression), kCriterionDigits)},
  }));
  const std::optional<double> level = Number(Get(model, "confidence_level"));
  const std::string level_text = FormatPercent(level.value_or(0.95));
  ReportTable coefficients;
  coefficients.caption = "Coefficients (" + ResponseLabel(audit) + " scale)";
  coefficients.columns = {{"coefficient", ValueKind::kText},      {"term", ValueKind::kText},
                          {"estimate", ValueKind::kQuantity},     {"SE", ValueKind::kQuantity},
                          {"t", ValueKind::kStatistic},           {"p", ValueKind::kPValue},
                          {level_text + " low", ValueKind::kQuantity}, {level_text + " high", ValueKind::kQuantity},
                          {"VIF", ValueKind::kQuantity}};
  ReportChart chart;
  chart.id = "coef-chart";
  chart.kind = ChartKind::kIntervals;
  chart.title = "Coefficients with " + level_text + " confidence intervals";
  chart.caption = "◆ the estimate, bar the interval, dark tick zero. Each row has its own scale so that "
                  "every interval can be read; compare rows by the table, not by bar length. An interval "
                  "that crosses zero is compatible with no effect (and all these intervals ignore the "
                  "selection).";
  ChartSeries series{"coefficients", false, true, {}};
  for (const json& coefficient : Get(model, "coefficients")) {
    const std::string name = Text(Get(coefficient, "name"));
    const V estimate = V::Quantity(Number(Get(coefficient, "estimate")), kCriterionDigits);
    const V low = V::Quantity(Number(Get(coefficient, "ci_low")), kCriterionDigits);
    const V high = V::Quantity(Number(Get(coefficient, "ci_high")), kCriterionDigits);
    coefficients.rows.push_back({V::Text(name), V::Text(Text(Get(coefficient, "term"))), estimate,
                                 V::Quantity(Number(Get(coefficient, "se"))),
                                 V::Statistic(Number(Get(coefficient, "t"))), V::PValue(Number(Get(coefficient, "p"))),
                                 low, high, V::Quantity(Number(Get(coefficient, "vif")), 3)});
    if (estimate.number && low.number && high.number) {
      ChartPoint point;
      point.x = *estimate.number;
      point.low = low.number;
      point.high = high.number;
      point.css_class = "coef";
      point.label = name;
      point.value_text = estimate.text + " [" + low.text + ", " + high.text + "]";
      point.title = name + ": " + point.value_text;
      series.points.push_back(std::move(point));
    }
  }
  section.blocks.push_back(std::move(coefficients));
  if (series.points.empty()) {
    section.blocks.push_back(ReportParagraph{
        "No coefficient has a confidence interval (no residual degrees of freedom).", "note"});
  } else {
    chart.series.push_back(std::move(series));
    section.blocks.push_back(std::move(chart));
  }
  if (anova.is_object()) {
    ReportTable table;
    table.caption = "Analysis of variance (sequential sums of squares, in model order)";
    table.columns = {{"source", ValueKind::kText}, {"df", ValueKind::kCount},       {"SS", ValueKind::kQuantity},
                     {"MS", ValueKind::kQuantity}, {"F", ValueKind::kStatistic}, {"p", ValueKind::kPValue}};
    auto row = [&](const json& entry) {
      table.rows.push_back({V::Text(Text(Get(entry, "source"))), V::Count(Count(Get(entry, "df"))),
                            V::Quantity(Number(Get(entry, "ss")), kCriterionDigits),
                            V::Quantity(Number(Get(entry, "ms")), kCriterionDigits),
                            V::Statistic(Number(Get(entry, "f"))), V::PValue(Number(Get(entry, "p")))});
    };
    for (const json& entry : Get(anova, "terms")) row(entry);
    for (const char* key : {"regression", "residual", "total"}) {
      if (Get(anova, key).is_object()) row(anova[key]);
    }
    section.blocks.push_back(std::move(table));
  }
  return section;
}

// A value flattened to "path: value" rows, for sections without a layout of their own.
void Flatten(const json& value, const std::string& path, ReportTable& table) {
  if (value.is_object()) {
    for (const auto& [key, item] : value.items()) Flatten(item, path.empty() ? key : path + "." + key, table);
  } else if (value.is_array() && !value.empty() && !value[0].is_primitive()) {
    for (std::size_t index = 0; index < value.size(); ++index) {
      Flatten(value[index], path + "[" + std::to_string(index) + "]", table);
    }
  } else if (value.is_number_integer()) {
    table.rows.push_back({V::Text(path), V::Count(value.get<std::int64_t>())});
  } else if (value.is_number()) {
    table.rows.push_back({V::Text(path), V::Quantity(Number(value), kCriterionDigits)});
  } else if (value.is_array()) {
    std::string text;
    for (const json& item : value) {
      text += (text.empty() ? "" : ", ") +
              (item.is_number_float() ? FormatQuantity(Number(item), kCriterionDigits) : Text(item));
    }
    table.rows.push_back({V::Text(path), V::Text(text)});
  } else {
    table.rows.push_back({V::Text(path), V::Text(Text(value))});
  }
}

ReportSection Generic(const json& audit, const char* key, const char* title) {
  ReportTable table;
  table.columns = {{"item", ValueKind::kText}, {"value", ValueKind::kText}};
  Flatten(audit[key], "", table);
  return {key, title, {std::move(table)}};
}

ReportSection Integrity(const json& audit) {
  const IntegrityFacts facts = ReadIntegrity(audit);
  std::string seal = facts.seal.empty() ? "(none)" : facts.seal;
  if (facts.seal_matches) {
    seal += *facts.seal_matches ? " (recomputed: matches the content)" : " (recomputed: DOES NOT MATCH the content)";
  }
  std::string signature = "absent";
  if (facts.signed_document) {
    signature = "present, " + facts.signature_algorithm + ", public key " + facts.public_key;
    if (facts.signature_consistent) {
      signature += *facts.signature_consistent ? " (verifies against that key)" : " (DOES NOT verify against that key)";
    }
  }
  std::vector<ReportFact> list{{"Seal", V::Text(seal)}, {"Signature", V::Text(signature)}};
  if (facts.has_parent) {
    list.push_back({"Parent seal", V::Text(facts.parent_seal + " (created " + facts.parent_created_at + ")")});
    list.push_back({"Parent data", V::Text(facts.parent_data_sha256)});
  }
  list.push_back({"Genesis", V::Text(facts.genesis)});
  list.push_back({"Route digest", V::Text(facts.route_digest + " (" + facts.step_count + " steps)")});
  list.push_back({"Tool", V::Text(facts.tool_version + ", commit " + facts.tool_commit + " (" + facts.tool_build + ")")});
  list.push_back({"Format", V::Text(facts.format_version + ", created " + facts.created_at)});
  ReportSection section{"integrity", "Integrity", {Facts(std::move(list))}};
  section.blocks.push_back(ReportParagraph{
      "The seal and digests catch accidental and casual edits; only a signature checked against a public "
      "key obtained separately shows who produced the audit. Check it with: stepledger verify AUDIT.json "
      "--data " + Text(Get(Get(audit, "data"), "file")),
      "note"});
  return section;
}

}  // namespace
}  // namespace report_detail

ReportModel BuildReportModel(const nlohmann::json& audit, const ReportDiagnostics* diagnostics,
                             const ReportOptions& options) {
  using namespace report_detail;
  options.Validate();
  CheckAuditShape(audit);
  ReportModel model;
  model.title = options.title.empty() ? "Selection report: " + Text(Get(Get(audit, "data"), "file")) : options.title;
  const IntegrityFacts integrity = ReadIntegrity(audit);
  model.subtitle = "Audit created " + integrity.created_at + " by " + integrity.tool_version + "; seal " +
                   (integrity.seal.empty() ? "(none)" : integrity.seal);
  if (!options.integrity_problems.empty()) {
    model.verified = false;
    model.integrity_warning.push_back(
        "WARNING: this audit does not verify: its digests do not hold, so its contents may have been "
        "edited after the run. Rendered only because --allow-unverified was given.");
    model.integrity_warning.insert(model.integrity_warning.end(), options.integrity_problems.begin(),
                                   options.integrity_problems.end());
  }
  model.has_diagnostics = diagnostics != nullptr;
  model.sections.push_back(Summary(audit));
  model.sections.push_back(Cautions(audit));
  model.sections.push_back(Plan(audit));
  model.sections.push_back(Data(audit, options));
  model.sections.push_back(Route(audit));
  model.sections.push_back(Candidates(audit));
  if (auto subsets = Subsets(audit)) model.sections.push_back(std::move(*subsets));
  model.sections.push_back(FinalModel(audit));
  model.sections.push_back(DiagnosticsSection(audit, diagnostics, options));
  if (audit.contains("validation")) model.sections.push_back(Generic(audit, "validation", "Validation"));
  if (audit.contains("stability")) model.sections.push_back(Generic(audit, "stability", "Stability"));
  model.sections.push_back(Integrity(audit));
  return model;
}

std::string RenderTextReport(const nlohmann::json& audit, const ReportDiagnostics* diagnostics,
                             const ReportOptions& options) {
  return RenderTextReport(BuildReportModel(audit, diagnostics, options));
}

std::string RenderHtmlReport(const nlohmann::json& audit, const ReportDiagnostics* diagnostics,
                             const ReportOptions& options) {
  return RenderHtmlReport(BuildReportModel(audit, diagnostics, options), options.chart_width);
}

}  // namespace stepledger
