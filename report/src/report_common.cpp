// What the text and HTML reports share: reading the audit, wording the plan, the thresholds
// for rows that stand out, the normal quantiles, the integrity facts.

#include <algorithm>
#include <cmath>
#include <limits>
#include <map>
#include <sstream>

#include "report_internal.h"
#include "stepledger/audit/audit_document.h"
#include "stepledger/audit/audit_verify.h"
#include "stepledger/audit/signature.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/number_format.h"

namespace stepledger {

namespace {

void RequireRange(const char* field, double value, double lo, double hi) {
  if (!(value >= lo && value <= hi)) {
    throw InputError(std::string("ReportOptions.") + field + ": expected a number in [" +
                     FormatQuantity(lo) + ", " + FormatQuantity(hi) + "], got " + FormatQuantity(value, 6));
  }
}

}  // namespace

void ReportOptions::Validate() const {
  RequireRange("chart_width", chart_width, 320, 2000);
  RequireRange("cooks_bins", static_cast<double>(cooks_bins), 10, 1000);
  RequireRange("density_columns", static_cast<double>(density_columns), 4, 200);
  RequireRange("density_rows", static_cast<double>(density_rows), 4, 200);
  RequireRange("histogram_bins", static_cast<double>(histogram_bins), 5, 200);
}

namespace report_detail {
namespace {

void Require(bool holds, const std::string& key, const std::string& expected) {
  if (!holds) throw InputError("audit: " + key + ": expected " + expected);
}

std::string Join(const std::vector<std::string>& items, std::string_view separator = ", ") {
  std::string text;
  for (const std::string& item : items) {
    if (!text.empty()) text += separator;
    text += item;
  }
  return text;
}

std::vector<std::string> Strings(const json& array) {
  std::vector<std::string> items;
  if (!array.is_array()) return items;
  for (const json& item : array) items.push_back(Text(item));
  return items;
}

// Display width in code points (UTF-8 continuation bytes do not count), for text tables.
std::size_t DisplayWidth(std::string_view text) {
  std::size_t width = 0;
  for (const char character : text) {
    if ((static_cast<unsigned char>(character) & 0xC0) != 0x80) ++width;
  }
  return width;
}

}  // namespace

void CheckAuditShape(const json& audit) {
  Require(audit.is_object(), "(document)", "a JSON object");
  Require(Get(audit, "format").is_string() && audit["format"] == kAuditFormat, "format",
          "\"" + std::string(kAuditFormat) + "\" (not a stepledger audit)");
  for (const char* key : {"plan", "data", "design", "search", "model", "tool"}) {
    Require(audit.contains(key) && audit[key].is_object(), key, "an object");
  }
  Require(Get(audit, "steps").is_array(), "steps", "an array");
  for (std::size_t index = 0; index < audit["steps"].size(); ++index) {
    const json& step = audit["steps"][index];
    const std::string key = "steps[" + std::to_string(index) + "]";
    Require(step.is_object(), key, "an object");
    Require(Get(step, "action").is_string(), key + ".action", "a string");
    Require(Get(step, "candidates").is_array() || Get(step, "candidates").is_null(),
            key + ".candidates", "an array");
    for (std::size_t candidate = 0; candidate < Get(step, "candidates").size(); ++candidate) {
      Require(step["candidates"][candidate].is_object(),
              key + ".candidates[" + std::to_string(candidate) + "]", "an object");
    }
  }
  if (audit.contains("subsets")) {
    Require(audit["subsets"].is_array(), "subsets", "an array");
    for (std::size_t index = 0; index < audit["subsets"].size(); ++index) {
      Require(audit["subsets"][index].is_object(), "subsets[" + std::to_string(index) + "]",
              "an object");
    }
  }
  const json& coefficients = Get(audit["model"], "coefficients");
  Require(coefficients.is_array() || coefficients.is_null(), "model.coefficients", "an array");
  for (std::size_t index = 0; index < coefficients.size(); ++index) {
    Require(coefficients[index].is_object(), "model.coefficients[" + std::to_string(index) + "]",
            "an object");
  }
  Require(Get(audit, "cautions").is_array() || Get(audit, "cautions").is_null(), "cautions",
          "an array");
}

const json& Get(const json& object, std::string_view key) {
  static const json null_value;
  if (!object.is_object()) return null_value;
  const auto found = object.find(key);
  return found == object.end() ? null_value : *found;
}

std::optional<double> Number(const json& value) {
  if (!value.is_number()) return std::nullopt;
  const double number = value.get<double>();
  if (!std::isfinite(number)) return std::nullopt;
  return number;
}

std::string Text(const json& value) {
  if (value.is_string()) return value.get<std::string>();
  if (value.is_null()) return "";
  return value.dump();
}

std::optional<std::int64_t> Count(const json& value) {
  // An unsigned value beyond int64 (a hostile audit's 2^64 - 1) is no count we can show: it
  // must not wrap to a negative one.
  if (value.is_number_unsigned()) {
    const auto count = value.get<std::uint64_t>();
    if (count > static_cast<std::uint64_t>(std::numeric_limits<std::int64_t>::max())) return std::nullopt;
    return static_cast<std::int64_t>(count);
  }
  if (value.is_number_integer()) return value.get<std::int64_t>();
  const std::optional<double> number = Number(value);
  if (!number || std::floor(*number) != *number || std::abs(*number) > 9e15) return std::nullopt;
  return static_cast<std::int64_t>(*number);
}

std::string JoinTerms(const json& terms) {
  std::vector<std::string> names;
  for (const json& term : terms) names.push_back(Text(term));
  return ModelTermsText(names);
}

std::string LevelsSummary(const json& column, std::size_t max_listed, bool with_counts) {
  const json& level_list = Get(column, "levels");
  if (!level_list.is_array() || level_list.empty()) return "";
  std::string levels = FormatCount(static_cast<std::int64_t>(level_list.size())) + " levels";
  if (level_list.size() > max_listed) return levels;
  levels += ":";
  for (const json& level : level_list) {
    levels += " " + Text(Get(level, "level"));
    if (with_counts) {
      const std::optional<std::int64_t> count = Count(Get(level, "count"));
      levels += " (" + (count ? FormatCount(*count) : Text(Get(level, "count"))) + ")";
    }
  }
  return levels;
}

std::string CriterionName(std::string_view code) {
  if (code == "adj-r2") return "adjusted R²";
  if (code == "aic") return "AIC";
  if (code == "aicc") return "AICc";
  if (code == "bic") return "BIC";
  if (code == "cp") return "Mallows' Cp";
  if (code == "partial-f") return "partial F";
  if (code == "cv") return "cross-validated error";
  return std::string(code);
}

bool HigherIsBetter(std::string_view code) { return code == "adj-r2"; }

bool IsPValueRule(std::string_view code) { return code == "partial-f"; }

std::string ResponseLabel(const json& audit) {
  const json& design = Get(audit, "design");
  std::string response = Text(Get(design, "response"));
  if (response.empty()) response = Text(Get(Get(Get(audit, "plan"), "normalised"), "response"));
  if (Text(Get(design, "response_transform")) == "log") return "log(" + response + ")";
  return response;
}

std::string ModelStatement(const json& audit) {
  const json& terms = Get(Get(audit, "model"), "terms");
  std::string statement = ResponseLabel(audit) + " explained by ";
  statement += terms.empty() ? std::string("the intercept alone") : JoinTerms(terms);
  if (Get(Get(Get(audit, "plan"), "normalised"), "intercept") == false) statement += " (no intercept)";
  const json& weights = Get(Get(audit, "design"), "weights").is_string()
                            ? Get(Get(audit, "design"), "weights")
                            : Get(Get(Get(audit, "plan"), "normalised"), "weights");
  if (weights.is_string()) statement += ", weighted by " + weights.get<std::string>();
  return statement;
}

std::string OutcomeInWords(const json& audit) {
  const json& search = Get(audit, "search");
  const std::string outcome = Text(Get(search, "outcome"));
  const std::string criterion = Text(Get(search, "criterion"));
  const std::string rule = Text(Get(search, "stop_rule"));
  if (outcome == "stopped-no-improvement") {
    if (IsPValueRule(criterion)) {
      // The rule names the threshold that stopped the search (search_context.cpp words it).
      if (rule.rfind("exit p-value", 0) == 0) return "stopped at exit_p: no term's p-value is above exit_p";
      return "stopped at entry_p: no candidate's p-value is below entry_p";
    }
    return "stopped: no move improves " + CriterionName(criterion);
  }
  if (outcome == "stopped-max-terms") return "stopped at max_terms";
  if (outcome == "cycle-detected") return "stopped: the next move would repeat a model";
  if (outcome == "no-eligible-terms") return "stopped: no term may move";
  if (outcome == "completed") return "completed";
  return outcome;
}

std::vector<std::string> PlanSentences(const json& audit) {
  const json& plan = Get(Get(audit, "plan"), "normalised");
  const json& search = Get(audit, "search");
  std::string method = Text(Get(plan, "method"));
  if (method.empty()) method = Text(Get(search, "method"));
  std::string criterion = Text(Get(plan, "criterion"));
  if (criterion.empty()) criterion = Text(Get(search, "criterion"));
  std::vector<std::string> sentences;

  if (method == "forward") {
    sentences.push_back("Forward selection: start from the intercept and any kept terms; at each "
                        "step add the candidate that improves the criterion most; stop when no "
                        "addition improves it.");
  } else if (method == "backward") {
    sentences.push_back("Backward elimination: start from every candidate term; at each step "
                        "remove the term whose removal improves the criterion most; stop when no "
                        "removal improves it.");
  } else if (method == "stepwise") {
    sentences.push_back("Stepwise selection: add the candidate that improves the criterion most, "
                        "then test every term in the model again for removal; stop when no move "
                        "improves it.");
  } else if (method == "all-subsets") {
    sentences.push_back("All subsets: for every model size, branch and bound keeps the best " +
                        Text(Get(plan, "best_per_size")) +
                        " models by residual sum of squares; the criterion chooses among them.");
    // The guarantee the search recorded (format_version 4; older audits are read as exact).
    const std::string guarantee = Text(Get(search, "subset_guarantee"));
    if (!guarantee.empty()) {
      std::string sentence = "The search was " + guarantee;
      const std::optional<std::int64_t> nodes = Count(Get(search, "subset_nodes"));
      const std::optional<std::int64_t> read = Count(Get(search, "subsets_evaluated"));
      if (nodes && *nodes > 0 && read) {
        sentence += " (" + FormatCount(*nodes) + " nodes of its tree formed, " + FormatCount(*read) + " models read)";
      }
      sentences.push_back(sentence + ".");
    }
  } else if (method == "none") {
    sentences.push_back("No selection: every term of the plan is fitted as given.");
  } else {
    sentences.push_back("Method: " + method + ".");
  }

  if (criterion == "partial-f") {
    sentences.push_back("Decisions by partial F tests: a term may enter while its p-value is below "
                        "entry_p = " + FormatPValue(Number(Get(plan, "entry_p"))) +
                        " and must leave while its p-value is above exit_p = " +
                        FormatPValue(Number(Get(plan, "exit_p"))) + ".");
  } else if (method != "none") {
    sentences.push_back("Criterion: " + CriterionName(criterion) + " (" +
                        (HigherIsBetter(criterion) ? "higher" : "lower") + " is better).");
  }
  if (criterion == "cv") {
    sentences.push_back("Cross-validation over " + Text(Get(plan, "folds")) + " folds, seed " +
                        Text(Get(plan, "seed")) + ".");
  }

  const json& design = Get(audit, "design");
  std::string response = Text(Get(plan, "response"));
  if (response.empty()) response = Text(Get(design, "response"));
  const std::string transform = Text(Get(plan, "response_transform"));
  sentences.push_back("Response: " + response +
                      (transform == "log" ? ", modelled on the log scale (natural log)"
                                          : ", modelled as recorded") +
                      (Get(plan, "intercept") == false ? ", without an intercept."
                                                       : ", with an intercept."));
  const json& weights = Get(plan, "weights");
  sentences.push_back(weights.is_string()
                          ? "Rows are weighted by the column " + weights.get<std::string>() +
                                " (precision weights)."
                          : "Rows are not weighted.");
  if (method != "none") {
    sentences.push_back(Get(plan, "hierarchy") == false
                            ? "Hierarchy is off: powers and products may enter without their parts."
                            : "Hierarchy is on: a power or product enters only after its parts "
                              "and its parts leave only after it.");
  }
  const std::vector<std::string> keep = Strings(Get(plan, "keep"));
  const std::vector<std::string> never = Strings(Get(plan, "never"));
  sentences.push_back(keep.empty() ? "No term is forced into the model."
                                   : "Always in the model: " + Join(keep) + ".");
  sentences.push_back(never.empty() ? "No term is ruled out by the plan."
                                    : "Never allowed: " + Join(never) + ".");
  const json& max_terms = Get(plan, "max_terms");
  sentences.push_back(max_terms.is_number()
                          ? "At most " + Text(max_terms) + " terms besides the intercept."
                          : "No limit on the number of terms.");
  const std::vector<std::string> missing = Strings(Get(plan, "missing"));
  if (!missing.empty()) {
    std::vector<std::string> quoted;
    for (const std::string& token : missing) quoted.push_back("\"" + token + "\"");
    sentences.push_back("Cells reading " + Join(quoted, " or ") +
                        " are missing; a row missing any used column is dropped for every "
                        "model alike.");
  }
  return sentences;
}

std::vector<std::pair<std::string, std::string>> TermDefinitions(const json& audit) {
  std::vector<std::pair<std::string, std::string>> definitions;
  const json& terms = Get(Get(Get(audit, "plan"), "normalised"), "terms");
  if (!terms.is_array()) return definitions;
  for (const json& term : terms) {
    const std::string name = Text(Get(term, "name"));
    std::string definition;
    if (term.contains("column")) {
      definition = "numeric column " + Text(term["column"]);
    } else if (term.contains("power")) {
      definition = Text(Get(term["power"], "column")) + " to the power " +
                   Text(Get(term["power"], "degree"));
    } else if (term.contains("log")) {
      definition = "natural log of " + Text(term["log"]);
    } else if (term.contains("categorical")) {
      definition = "categorical " + Text(term["categorical"]) + ", one indicator per level against "
                   "the baseline " + (Get(term, "baseline").is_string() ? Text(term["baseline"]) : "(first level)");
    } else if (term.contains("product")) {
      definition = "product of " + Join(Strings(term["product"]), " and ");
    } else {
      definition = Text(term);
    }
    definitions.emplace_back(name, definition);
  }
  return definitions;
}

std::string MoveLabel(std::string_view action, std::string_view term) {
  if (term.empty()) return std::string(action);
  return std::string(action) + " " + std::string(term);
}

std::string StepLabel(const json& step) { return MoveLabel(Text(Get(step, "action")), Text(Get(step, "term"))); }

std::vector<SubsetBest> BestSubsetBySize(const json& audit) {
  const bool higher = HigherIsBetter(Text(Get(Get(audit, "search"), "criterion")));
  std::map<std::int64_t, SubsetBest> best;
  for (const json& subset : Get(audit, "subsets")) {
    const std::optional<double> score = Number(Get(subset, "score"));
    if (!score || !Get(subset, "size").is_number_integer()) continue;
    const std::int64_t size = subset["size"].get<std::int64_t>();
    const auto found = best.find(size);
    if (found == best.end() || (higher ? *score > found->second.score : *score < found->second.score)) {
      best[size] = SubsetBest{size, *score, Strings(Get(subset, "terms"))};
    }
  }
  std::vector<SubsetBest> out;
  for (auto& [size, entry] : best) out.push_back(std::move(entry));
  return out;
}

std::string StandOutReasons(const RowDiagnostic& row, const StandOutThresholds& thresholds) {
  std::vector<std::string> reasons;
  if (thresholds.CooksAbove(row)) reasons.push_back("Cook's D > " + FormatQuantity(thresholds.cooks, 3));
  if (thresholds.StandardizedResidualAbove(row)) {
    reasons.push_back("|std. residual| > " + FormatQuantity(thresholds.standardized_residual, 3));
  }
  if (thresholds.LeverageAbove(row)) reasons.push_back("leverage > " + FormatQuantity(thresholds.leverage, 3));
  if (!row.standardized_residual) reasons.push_back("leverage 1: fits itself exactly");
  return Join(reasons, "; ");
}

std::vector<RowDiagnostic> ListedRowsThatStandOut(const DiagnosticsResult& result) {
  std::vector<RowDiagnostic> rows;
  for (const auto* list : {&result.largest_cooks_distance, &result.largest_standardized_residual,
                           &result.largest_leverage}) {
    for (const RowDiagnostic& row : *list) {
      if (result.thresholds.StandsOut(row)) rows.push_back(row);
    }
  }
  std::sort(rows.begin(), rows.end(), LargerCooksDistanceFirst);
  rows.erase(std::unique(rows.begin(), rows.end(),
                         [](const RowDiagnostic& a, const RowDiagnostic& b) { return a.row_index == b.row_index; }),
             rows.end());
  return rows;
}

IntegrityFacts ReadIntegrity(const json& audit) {
  IntegrityFacts facts;
  facts.seal = Text(Get(audit, "seal"));
  if (!facts.seal.empty()) {
    try {
      facts.seal_matches = ComputeSeal(audit) == facts.seal;
    } catch (const std::exception&) {
      facts.seal_matches = false;
    }
  }
  // The same check as verify's without --public-key: against the key the audit records.
  const SignatureCheck check = CheckAuditSignature(audit);
  facts.signed_document = check.shape != SignatureCheck::Shape::kAbsent;
  if (facts.signed_document) {
    facts.signature_algorithm = check.Algorithm();
    facts.public_key = check.key_label.empty() ? "unreadable key" : check.key_label;
    facts.signature_consistent = check.holds;
  }
  const json& parent = Get(audit, "parent");
  facts.has_parent = !parent.is_null();
  if (facts.has_parent) {
    facts.parent_seal = Text(Get(parent, "seal"));
    facts.parent_created_at = Text(Get(parent, "created_at"));
    facts.parent_data_sha256 = Text(Get(parent, "data_sha256"));
  }
  const json& tool = Get(audit, "tool");
  facts.tool_version = Text(Get(tool, "name")) + " " + Text(Get(tool, "version"));
  facts.tool_commit = Text(Get(tool, "commit"));
  const json& build = Get(tool, "build");
  facts.tool_build = Text(Get(build, "compiler")) + ", " + Text(Get(build, "build_type")) + ", BLAS " +
                     Text(Get(build, "blas"));
  facts.created_at = Text(Get(audit, "created_at"));
  facts.format_version = Text(Get(audit, "format")) + " " + Text(Get(audit, "format_version"));
  const json& digests = Get(audit, "digests");
  facts.genesis = Text(Get(digests, "genesis"));
  facts.route_digest = Text(Get(digests, "route"));
  facts.step_count = Text(Get(digests, "step_count"));
  return facts;
}

std::string TextTable(const std::vector<std::string>& headers,
                      const std::vector<std::vector<std::string>>& rows,
                      const std::vector<bool>& right_aligned, std::string_view indent) {
  std::vector<std::size_t> widths(headers.size(), 0);
  for (std::size_t column = 0; column < headers.size(); ++column) widths[column] = DisplayWidth(headers[column]);
  for (const auto& row : rows) {
    for (std::size_t column = 0; column < row.size() && column < widths.size(); ++column) {
      widths[column] = std::max(widths[column], DisplayWidth(row[column]));
    }
  }
  std::ostringstream out;
  auto line = [&](const std::vector<std::string>& cells) {
    std::string text(indent);
    for (std::size_t column = 0; column < widths.size(); ++column) {
      const std::string cell = column < cells.size() ? cells[column] : "";
      const std::string pad(widths[column] - DisplayWidth(cell), ' ');
      const bool right = column < right_aligned.size() && right_aligned[column];
      const bool last = column + 1 == widths.size();
      text += right ? pad + cell : (last ? cell : cell + pad);
      if (!last) text += "  ";
    }
    while (!text.empty() && text.back() == ' ') text.pop_back();
    out << text << "\n";
  };
  line(headers);
  std::vector<std::string> rule;
  for (const std::size_t width : widths) rule.push_back(std::string(width, '-'));
  line(rule);
  for (const auto& row : rows) line(row);
  return out.str();
}

std::string DiagnosticsHowTo(const json& audit) {
  std::string data = Text(Get(Get(audit, "data"), "file"));
  if (data.empty()) data = "DATA.csv";
  return "Not included: residuals, leverage and Cook's distance need one more pass over the data. "
         "Run: stepledger report AUDIT.json --data " + data + " --html report.html";
}

}  // namespace report_detail
}  // namespace stepledger
