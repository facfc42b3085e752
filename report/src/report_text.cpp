// The report as terminal tables: the same sections as the HTML report, charts replaced by the
// tables they draw, for a quick look and for diffs.

#include <sstream>

#include "report_internal.h"
#include "stepledger/report/report.h"

namespace stepledger {
namespace {

using namespace report_detail;

void Heading(std::ostringstream& out, const std::string& title) {
  out << "\n" << title << "\n" << std::string(title.size(), '-') << "\n";
}

std::string JoinTerms(const json& terms) {
  std::string text;
  for (const json& term : terms) text += (text.empty() ? "" : ", ") + Text(term);
  return text.empty() ? "(intercept only)" : text;
}

// A JSON value flattened to "path: value" lines, for sections rendered generically.
void Flatten(const json& value, const std::string& path, std::vector<std::vector<std::string>>& rows) {
  if (value.is_object()) {
    for (const auto& [key, item] : value.items()) Flatten(item, path.empty() ? key : path + "." + key, rows);
  } else if (value.is_array() && !value.empty() && !value[0].is_primitive()) {
    for (std::size_t index = 0; index < value.size(); ++index) {
      Flatten(value[index], path + "[" + std::to_string(index) + "]", rows);
    }
  } else if (value.is_number_float()) {
    rows.push_back({path, Format(Number(value), 6)});
  } else {
    rows.push_back({path, Text(value)});
  }
}

}  // namespace

std::string RenderTextReport(const nlohmann::json& audit, const ReportDiagnostics* diagnostics,
                             const ReportOptions& options) {
  options.Validate();
  CheckAuditShape(audit);
  const json& data = Get(audit, "data");
  const json& search = Get(audit, "search");
  const json& model = Get(audit, "model");
  const std::string criterion = Text(Get(search, "criterion"));
  const std::string criterion_name = CriterionValueName(criterion);
  std::ostringstream out;

  const std::string title =
      options.title.empty() ? "Selection report: " + Text(Get(data, "file")) : options.title;
  out << title << "\n" << std::string(title.size(), '=') << "\n";
  const IntegrityFacts integrity = ReadIntegrity(audit);
  out << "Audit created " << integrity.created_at << " by " << integrity.tool_version << "\n";

  Heading(out, "Summary");
  out << "  Final model: " << JoinTerms(Get(model, "terms")) << "\n";
  out << "  n = " << FormatCount(Get(model, "n")) << ", k = " << Text(Get(model, "k"))
      << ", R² = " << Format(Number(Get(model, "r2"))) << ", adjusted R² = "
      << Format(Number(Get(model, "adj_r2"))) << ", sigma = " << Format(Number(Get(model, "sigma")))
      << " (" << ResponseLabel(audit) << ")\n";
  out << "  " << criterion_name << " of the final model: " << Format(Number(Get(search, "final_criterion_value")), 6) << "\n";
  out << "  Stop: " << Text(Get(search, "stop_rule")) << "\n";

  Heading(out, "CAUTIONS (this run)");
  const json& cautions = Get(audit, "cautions");
  if (cautions.empty()) out << "  (none recorded)\n";
  for (const json& caution : cautions) {
    if (caution.is_object()) {
      out << "  ! [" << Text(Get(caution, "kind")) << "] " << Text(Get(caution, "message")) << "\n";
    } else {
      out << "  ! " << Text(caution) << "\n";
    }
  }

  Heading(out, "Plan");
  for (const std::string& sentence : PlanSentences(audit)) out << "  " << sentence << "\n";
  std::vector<std::vector<std::string>> term_rows;
  for (const auto& [name, definition] : TermDefinitions(audit)) term_rows.push_back({name, definition});
  if (!term_rows.empty()) {
    out << "\n  Candidate terms:\n" << TextTable({"term", "definition"}, term_rows, {false, false}, "    ");
  }
  for (const json& skipped : Get(Get(audit, "design"), "skipped")) {
    out << "  Skipped term " << Text(Get(skipped, "term")) << ": " << Text(Get(skipped, "reason")) << "\n";
  }

  Heading(out, "Data");
  out << "  File " << Text(Get(data, "file")) << ", " << FormatCount(Get(data, "bytes")) << " bytes\n";
  out << "  SHA-256 " << Text(Get(data, "sha256")) << "\n";
  out << "  Rows read " << FormatCount(Get(data, "rows_read")) << ", used "
      << FormatCount(Get(data, "rows_used")) << "\n";
  std::vector<std::vector<std::string>> dropped_rows;
  for (const auto& [reason, count] : Get(data, "rows_dropped").items()) {
    dropped_rows.push_back({reason, FormatCount(count)});
  }
  if (dropped_rows.empty()) {
    out << "  No rows dropped.\n";
  } else {
    out << "  Rows dropped, by reason:\n" << TextTable({"reason", "rows"}, dropped_rows, {false, true}, "    ");
  }
  std::vector<std::vector<std::string>> column_rows;
  for (const json& column : Get(data, "columns")) {
    const std::string levels = LevelsSummary(column, options.max_levels_listed, /*with_counts=*/false);
    column_rows.push_back({Text(Get(column, "name")), Text(Get(column, "type")),
                           FormatCount(Get(column, "present")), FormatCount(Get(column, "missing")),
                           Format(Number(Get(column, "min"))), Format(Number(Get(column, "max"))),
                           Format(Number(Get(column, "mean"))), levels});
  }
  if (!column_rows.empty()) {
    out << "  Columns:\n"
        << TextTable({"column", "type", "present", "missing", "min", "max", "mean", "levels"},
                     column_rows, {false, false, true, true, true, true, true, false}, "    ");
  }

  Heading(out, "Route (" + criterion_name + " by step)");
  std::vector<std::vector<std::string>> route_rows;
  for (const json& step : audit["steps"]) {
    route_rows.push_back({Text(Get(step, "index")), Text(Get(step, "action")), Text(Get(step, "term")),
                          Format(Number(Get(step, "criterion_before")), 6),
                          Format(Number(Get(step, "criterion_value")), 6), Text(Get(step, "rule"))});
  }
  out << TextTable({"step", "action", "term", "before", "after", "rule"}, route_rows,
                   {true, false, false, true, true, false});

  Heading(out, "Candidates scored at each step");
  const bool p_rule = criterion == "partial-f";
  bool any_candidates = false;
  for (const json& step : audit["steps"]) {
    const json& candidates = Get(step, "candidates");
    if (candidates.empty()) continue;
    any_candidates = true;
    out << "  Step " << Text(Get(step, "index")) << " (" << StepLabel(step) << "), "
        << candidates.size() << " candidates:\n";
    std::vector<std::vector<std::string>> rows;
    for (const json& candidate : candidates) {
      const bool chosen = Text(Get(candidate, "term")) == Text(Get(step, "term")) &&
                          Text(Get(candidate, "action")) == Text(Get(step, "action"));
      std::string status = Get(candidate, "eligible") == false
                               ? "ineligible: " + Text(Get(candidate, "reason"))
                               : (chosen ? "CHOSEN" : "eligible");
      rows.push_back({Text(Get(candidate, "term")), Text(Get(candidate, "action")),
                      Text(Get(candidate, "df")), Format(Number(Get(candidate, "score")), 6),
                      Format(Number(Get(candidate, "f"))), FormatP(Number(Get(candidate, "p"))), status});
    }
    out << TextTable({"term", "move", "df", p_rule ? "res. mean sq." : criterion_name, "F", "p", "status"},
                     rows, {false, false, true, true, true, true, false}, "    ");
  }
  if (!any_candidates) out << "  No candidate tables in this route (all-subsets lists its models below).\n";

  if (audit.contains("subsets")) {
    Heading(out, "All subsets: best " + CriterionName(criterion) + " by model size");
    std::vector<std::vector<std::string>> best_rows;
    for (const SubsetBest& best : BestSubsetBySize(audit)) {
      std::string terms;
      for (const std::string& term : best.terms) terms += (terms.empty() ? "" : ", ") + term;
      best_rows.push_back({std::to_string(best.size), Format(best.score, 6), terms.empty() ? "(intercept only)" : terms});
    }
    out << TextTable({"size", "best", "terms"}, best_rows, {true, true, false});
    out << "\n  Every kept subset:\n";
    std::vector<std::vector<std::string>> subset_rows;
    for (const json& subset : audit["subsets"]) {
      subset_rows.push_back({Text(Get(subset, "size")), Text(Get(subset, "rank")),
                             Format(Number(Get(subset, "rss")), 6), Format(Number(Get(subset, "score")), 6),
                             JoinTerms(Get(subset, "terms"))});
    }
    out << TextTable({"size", "rank", "RSS", criterion_name, "terms"}, subset_rows,
                     {true, true, true, true, false}, "    ");
  }

  Heading(out, "Final model (response " + ResponseLabel(audit) + ")");
  const std::string level = Format(Number(Get(model, "confidence_level")).value_or(0.95) * 100, 3);
  std::vector<std::vector<std::string>> coefficient_rows;
  for (const json& coefficient : Get(model, "coefficients")) {
    coefficient_rows.push_back(
        {Text(Get(coefficient, "name")), Format(Number(Get(coefficient, "estimate")), 6),
         Format(Number(Get(coefficient, "se"))), Format(Number(Get(coefficient, "t"))),
         FormatP(Number(Get(coefficient, "p"))), Format(Number(Get(coefficient, "ci_low")), 6),
         Format(Number(Get(coefficient, "ci_high")), 6), Format(Number(Get(coefficient, "vif")), 3)});
  }
  out << TextTable({"coefficient", "estimate", "SE", "t", "p", level + "% low", level + "% high", "VIF"},
                   coefficient_rows, {false, true, true, true, true, true, true, true});
  out << "  F = " << Format(Number(Get(model, "f"))) << " (p " << FormatP(Number(Get(model, "f_p")))
      << "), AIC " << Format(Number(Get(model, "aic")), 6) << ", BIC "
      << Format(Number(Get(model, "bic")), 6) << ", RSS " << Format(Number(Get(model, "rss")), 6) << "\n";
  std::vector<std::vector<std::string>> anova_rows;
  const json& anova = Get(model, "anova");
  auto anova_row = [&](const json& row) {
    anova_rows.push_back({Text(Get(row, "source")), Format(Number(Get(row, "df"))),
                          Format(Number(Get(row, "ss")), 6), Format(Number(Get(row, "ms")), 6),
                          Format(Number(Get(row, "f"))), FormatP(Number(Get(row, "p")))});
  };
  for (const json& row : Get(anova, "terms")) anova_row(row);
  for (const char* key : {"regression", "residual", "total"}) {
    if (Get(anova, key).is_object()) anova_row(anova[key]);
  }
  if (!anova_rows.empty()) {
    out << "  Analysis of variance (sequential, model order):\n"
        << TextTable({"source", "df", "SS", "MS", "F", "p"}, anova_rows,
                     {false, true, true, true, true, true}, "    ");
  }

  Heading(out, "Diagnostics");
  if (diagnostics == nullptr) {
    out << "  " << DiagnosticsHowTo(audit) << "\n";
  } else {
    const StandOutRules rules = MakeStandOutRules(*diagnostics);
    const std::vector<StandOutRow> stand_out = RowsThatStandOut(*diagnostics, rules);
    out << "  " << diagnostics->result.rows.size() << " rows diagnosed; largest leverage "
        << Format(diagnostics->result.max_leverage) << "; PRESS " << Format(diagnostics->result.press, 6)
        << "; sigma " << Format(diagnostics->sigma) << ". Charts are in the HTML report.\n";
    out << "  Rows that stand out (common practice thresholds: Cook's D > 4/n = "
        << Format(rules.cooks, 3) << ", |standardised residual| > 3, leverage > 2k/n = "
        << Format(rules.leverage, 3) << "): " << stand_out.size() << "\n";
    std::vector<std::vector<std::string>> rows;
    for (std::size_t index = 0; index < stand_out.size() && index < options.max_outlier_rows; ++index) {
      const RowDiagnostic& row = *stand_out[index].row;
      std::string reasons;
      for (const std::string& reason : stand_out[index].reasons) reasons += (reasons.empty() ? "" : "; ") + reason;
      rows.push_back({std::to_string(row.line), Format(row.fitted, 6), Format(row.residual, 4),
                      Format(row.standardized_residual, 3), Format(row.leverage, 3),
                      Format(row.cooks_distance, 3), reasons});
    }
    if (!rows.empty()) {
      out << TextTable({"line", "fitted", "residual", "std. res.", "leverage", "Cook's D", "why"}, rows,
                       {true, true, true, true, true, true, false}, "    ");
    }
    if (stand_out.size() > options.max_outlier_rows) {
      out << "    ... and " << stand_out.size() - options.max_outlier_rows << " more\n";
    }
  }

  for (const char* key : {"validation", "stability"}) {
    if (!audit.contains(key)) continue;
    Heading(out, std::string(key) == "validation" ? "Validation" : "Stability");
    std::vector<std::vector<std::string>> rows;
    Flatten(audit[key], "", rows);
    out << TextTable({"item", "value"}, rows, {false, false});
  }

  Heading(out, "Integrity");
  out << "  Seal " << (integrity.seal.empty() ? "(none)" : integrity.seal);
  if (integrity.seal_matches) out << (*integrity.seal_matches ? " (matches the content)" : " (DOES NOT MATCH the content)");
  out << "\n";
  if (integrity.signed_document) {
    out << "  Signature: present, " << integrity.signature_algorithm << ", public key "
        << integrity.public_key;
    if (integrity.signature_consistent) {
      out << (*integrity.signature_consistent ? " (verifies against that key)" : " (DOES NOT verify)");
    }
    out << "\n";
  } else {
    out << "  Signature: absent\n";
  }
  if (integrity.has_parent) {
    out << "  Parent seal " << integrity.parent_seal << " (created " << integrity.parent_created_at
        << ", data " << integrity.parent_data_sha256 << ")\n";
  }
  out << "  Genesis " << integrity.genesis << ", route digest " << integrity.route_digest << " ("
      << integrity.step_count << " steps)\n";
  out << "  Tool " << integrity.tool_version << ", commit " << integrity.tool_commit << " ("
      << integrity.tool_build << "); " << integrity.format_version << "\n";
  out << "  Check it: stepledger verify AUDIT.json --data " << Text(Get(data, "file")) << "\n";
  return out.str();
}

}  // namespace stepledger
