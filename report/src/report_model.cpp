// BuildReportModel: reads the audit once and formats every number once (engine/number_format.h),
// so that the text, HTML and JSON back ends show the same text for the same number.

#include <algorithm>
#include <cmath>

#include "report_internal.h"
#include "stepledger/audit/audit_format_versions.h"
#include "stepledger/engine/number_format.h"
#include "stepledger/selection/criterion.h"

namespace stepledger {

const char* ToString(ValueKind kind) {
  switch (kind) {
    case ValueKind::kText: return "text";
    case ValueKind::kCount: return "count";
    case ValueKind::kQuantity: return "quantity";
    case ValueKind::kStatistic: return "statistic";
    case ValueKind::kPValue: return "p-value";
    case ValueKind::kPercent: return "percent";
    case ValueKind::kCriterion: return "criterion";
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
ReportValue ReportValue::CriterionValue(std::string_view criterion, std::optional<double> value) {
  const std::optional<Criterion> kind = CriterionFromString(std::string(criterion));
  return {ValueKind::kCriterion, Finite(value),
          kind ? FormatCriterionValue(*kind, value) : FormatQuantity(value, report_detail::kCriterionDigits)};
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
                   V::CriterionValue(criterion, Number(Get(search, "final_criterion_value")))});
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

ReportSection PlanSection(const json& audit) {
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
      {"AIC", V::CriterionValue("aic", Number(Get(model, "aic")))},
      {"BIC", V::CriterionValue("bic", Number(Get(model, "bic")))},
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
  ChartSeries series{"coefficients", false, true, {}, {}};
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
    table.rows.push_back({V::Text(path), V::Count(Count(value))});
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
    signature = "present, " + facts.signature_algorithm + ", " + facts.public_key;
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

ReportModel BuildReportModel(const nlohmann::json& recorded, const ReportDiagnostics* diagnostics,
                             const ReportOptions& options) {
  using namespace report_detail;
  options.Validate();
  // The integrity block speaks of the document as recorded (its seal covers those bytes); every
  // other section reads it in today's names, so an older audit reads like a new one.
  const nlohmann::json audit = AuditInCurrentShape(recorded);
  CheckAuditShape(audit);
  ReportModel model;
  model.title = options.title.empty() ? "Selection report: " + Text(Get(Get(audit, "data"), "file")) : options.title;
  const IntegrityFacts integrity = ReadIntegrity(recorded);
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
  model.sections.push_back(PlanSection(audit));
  model.sections.push_back(Data(audit, options));
  model.sections.push_back(RouteSection(audit));
  model.sections.push_back(CandidatesSection(audit));
  if (auto subsets = SubsetsSection(audit)) model.sections.push_back(std::move(*subsets));
  model.sections.push_back(FinalModel(audit));
  model.sections.push_back(DiagnosticsSection(audit, diagnostics, options));
  if (auto validation = ValidationSection(audit)) model.sections.push_back(std::move(*validation));
  if (audit.contains("stability")) model.sections.push_back(Generic(audit, "stability", "Stability"));
  model.sections.push_back(Integrity(recorded));
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
