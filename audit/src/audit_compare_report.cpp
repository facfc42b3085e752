// The comparison of two audits as text for the terminal (AuditComparison::BriefReport and
// FullReport): one renderer per part, in the order a reviewer reads them.
#include <algorithm>
#include <cstdint>
#include <optional>
#include <sstream>
#include <string>
#include <vector>

#include "audit_compare_internal.h"
#include "stepledger/audit/audit_compare.h"
#include "stepledger/engine/number_format.h"

namespace stepledger {

namespace {

using json = nlohmann::json;
using compare_detail::ThresholdText;

std::string FormatJsonNumber(const json& value) {
  return FormatQuantity(value.is_number() ? std::optional<double>(value.get<double>()) : std::nullopt);
}


std::string PlanValueText(const json& value) {
  if (value.is_string()) return value.get<std::string>();
  if (value.is_null()) return "none";
  if (value.is_number()) return FormatJsonNumber(value);
  if (value.is_array() && value.size() > 4) return std::to_string(value.size()) + " entries";
  return value.dump();
}

std::string VerdictSentence(ComparisonVerdict verdict) {
  switch (verdict) {
    case ComparisonVerdict::kSameModel:
      return "Verdict: same model (the same terms, every estimate unchanged).";
    case ComparisonVerdict::kSameTermsRefitted:
      return "Verdict: same terms, refitted coefficients (the same terms; estimates moved, see below).";
    case ComparisonVerdict::kDifferentTerms:
      return "Verdict: different terms (a term entered or left the final model).";
  }
  return {};
}

std::string NamesText(const std::vector<std::string>& names) {
  std::string joined;
  for (const std::string& name : names) joined += (joined.empty() ? "" : ", ") + name;
  return joined.empty() ? std::string("none") : joined;
}

std::string CountText(const json& value) {
  if (value.is_number_unsigned() && value.get<std::uint64_t>() <= static_cast<std::uint64_t>(INT64_MAX)) {
    return FormatCount(static_cast<std::int64_t>(value.get<std::uint64_t>()));
  }
  if (value.is_number_integer() && !value.is_number_unsigned()) return FormatCount(value.get<std::int64_t>());
  return "n/a";
}

// A member of a JSON object, or null when it is absent (or the value is not an object).
const json& MemberOrNull(const json& object, const char* key) {
  static const json kNull;
  if (!object.is_object()) return kNull;
  const auto found = object.find(key);
  return found == object.end() ? kNull : *found;
}

std::string CountText(const std::optional<std::int64_t>& value) {
  return value ? FormatCount(*value) : std::string("n/a");
}

void RenderVerdictAndData(const AuditComparison& comparison, std::ostringstream& text) {
  text << comparison.BriefReport() << "\n";
  text << "Comparison with the old run";
  if (comparison.old_seal) text << " (seal " << comparison.old_seal->substr(0, 16) << "...)";
  text << "\n";
  text << "  data: " << (comparison.same_data ? "the same bytes" : "different bytes") << "\n";
}

void RenderPlanDifferences(const PlanComparisonPart& plan, std::ostringstream& text) {
  if (!plan.compared) return;
  if (plan.differences.empty()) {
    text << "  plan: the same\n";
    return;
  }
  text << "  plan differences:\n";
  for (const PlanDifference& entry : plan.differences) {
    text << "    " << entry.key << ": " << PlanValueText(entry.old_value) << " -> " << PlanValueText(entry.new_value)
         << "\n";
  }
}

void RenderColumns(const ColumnsComparisonPart& columns, std::ostringstream& text) {
  text << "  columns added: " << NamesText(columns.added) << "\n";
  text << "  columns lost: " << NamesText(columns.lost) << "\n";
  if (!columns.type_changed.empty()) {
    text << "  columns whose type changed:";
    for (const ColumnTypeChange& entry : columns.type_changed) {
      text << " " << entry.column << " (" << entry.old_type << " -> " << entry.new_type << ")";
    }
    text << "\n";
  }
  const double column_threshold = columns.moved_threshold_in_old_sd;
  if (columns.moved.empty()) {
    text << "  columns that moved (mean, or range reaching beyond the old one, by more than "
         << ThresholdText(column_threshold) << " old SD): none\n";
    return;
  }
  text << "  columns that moved (mean, or range reaching beyond the old one, by more than "
       << ThresholdText(column_threshold) << " old SD):\n";
  for (const MovedColumn& entry : columns.moved) {
    text << "    " << entry.column << ": mean " << FormatJsonNumber(entry.old_summary["mean"]) << " -> "
         << FormatJsonNumber(entry.new_summary["mean"]);
    if (entry.mean_shift_in_old_sd) text << " (" << FormatFixed(*entry.mean_shift_in_old_sd, 2) << " old SD)";
    text << ", range " << FormatJsonNumber(entry.old_summary["min"]) << " to "
         << FormatJsonNumber(entry.old_summary["max"]) << " -> " << FormatJsonNumber(entry.new_summary["min"])
         << " to " << FormatJsonNumber(entry.new_summary["max"]) << "\n";
  }
}

void RenderRows(const RowsComparisonPart& rows, std::ostringstream& text) {
  text << "  rows used: " << CountText(rows.old_rows_used) << " -> " << CountText(rows.new_rows_used) << "\n";
}

std::string RouteMoveText(const std::optional<RouteMove>& move) {
  if (!move) return std::string("(no step)");
  std::string out = move->action.value_or("?");
  if (move->term) out += " " + *move->term;
  return out;
}

void RenderRoute(const RouteComparisonPart& route, std::ostringstream& text) {
  if (route.same) {
    text << "  route: the same actions and terms at every step\n";
    return;
  }
  text << "  route: parts at step "
       << (route.first_difference_step ? std::to_string(*route.first_difference_step) : std::string("null"))
       << ": old " << RouteMoveText(route.old_move) << ", new " << RouteMoveText(route.new_move) << "\n";
}

void RenderFinalTerms(const FinalTermsComparisonPart& final_terms, std::ostringstream& text) {
  text << "  terms entered the final model: " << NamesText(final_terms.entered) << "\n";
  text << "  terms left the final model: " << NamesText(final_terms.left) << "\n";
}

void RenderCoefficients(const AuditComparison& comparison, std::ostringstream& text) {
  if (comparison.coefficients.empty()) return;
  text << "  coefficient changes (new - old, in units of the old SE; * beyond "
       << ThresholdText(comparison.coefficient_mark_in_se) << " SE):\n";
  std::size_t width = 8;
  for (const CoefficientChange& entry : comparison.coefficients) width = std::max(width, entry.name.size());
  for (const CoefficientChange& entry : comparison.coefficients) {
    const std::string change =
        entry.change_in_old_se ? FormatFixed(*entry.change_in_old_se, 2) + " SE" : std::string("n/a");
    text << "    " << entry.name << std::string(width - entry.name.size(), ' ') << "  "
         << FormatQuantity(entry.old_estimate) << " -> " << FormatQuantity(entry.new_estimate) << "  " << change
         << (entry.beyond_mark ? " *" : "") << "\n";
  }
}

void RenderPrediction(const json& prediction, std::ostringstream& text) {
  const json& available = MemberOrNull(prediction, "available");
  if (!available.is_boolean() || !available.get<bool>()) {
    const json& reason = MemberOrNull(prediction, "reason");
    text << "  old model on the new rows: not available (" << (reason.is_string() ? reason.get<std::string>() : "")
         << ")\n";
    return;
  }
  text << "  old model on the new rows: RMSE " << FormatJsonNumber(MemberOrNull(prediction, "old_model_rmse"))
       << " (mean error " << FormatJsonNumber(MemberOrNull(prediction, "old_model_mean_error"))
       << "), beside the new model's RMSE " << FormatJsonNumber(MemberOrNull(prediction, "new_model_rmse"))
       << " over " << CountText(MemberOrNull(prediction, "rows")) << " rows";
  const json& not_priced = MemberOrNull(prediction, "not_priced");
  const json& unseen = MemberOrNull(prediction, "unseen_level_rows");
  if (not_priced.is_object()) {
    std::string skipped;
    for (const auto& [flag, rows] : not_priced.items()) {
      if (rows.is_number_integer() && CountText(rows) != "n/a" && CountText(rows) != "0") {
        skipped += (skipped.empty() ? "" : ", ") + CountText(rows) + " " + flag;
      }
    }
    if (!skipped.empty()) text << "; not priced: " << skipped;
  } else if (unseen.is_number_integer() && CountText(unseen) != "n/a" && CountText(unseen) != "0") {
    text << "; " << CountText(unseen) << " rows have levels the old model never saw";
  }
  text << "\n";
}

// The k-fold and holdout RMSE side by side, and the bootstrap inclusion frequencies of both runs
// (beside the route: a term that entered or left often moved in frequency too).
void RenderValidation(const ValidationComparisonPart& validation, std::ostringstream& text) {
  if (validation.folds_compared) {
    text << "  k-fold RMSE: " << FormatQuantity(validation.old_folds_rmse) << " -> "
         << FormatQuantity(validation.new_folds_rmse) << "\n";
  }
  if (validation.holdout_compared) {
    text << "  holdout RMSE: " << FormatQuantity(validation.old_holdout_rmse) << " -> "
         << FormatQuantity(validation.new_holdout_rmse) << "\n";
  }
  if (!validation.inclusion_compared) return;
  text << "  bootstrap inclusion (share of replicates choosing the term, old -> new):\n";
  std::size_t width = 8;
  for (const InclusionChange& change : validation.inclusion) width = std::max(width, change.term.size());
  for (const InclusionChange& change : validation.inclusion) {
    const auto share = [](const std::optional<double>& value) {
      return value ? FormatPercent(value) : std::string("not a candidate");
    };
    text << "    " << change.term << std::string(width - change.term.size(), ' ') << "  "
         << share(change.old_frequency) << " -> " << share(change.new_frequency) << "\n";
  }
}

}  // namespace

std::string AuditComparison::BriefReport() const {
  std::string brief = VerdictSentence(verdict);
  if (validation.largest_change) {
    const InclusionChange& change = validation.inclusion[*validation.largest_change];
    brief += " Largest change in bootstrap inclusion: " + change.term + " " + FormatPercent(change.old_frequency) +
             " -> " + FormatPercent(change.new_frequency) + ".";
  }
  return brief;
}

std::string AuditComparison::FullReport() const {
  std::ostringstream text;
  RenderVerdictAndData(*this, text);
  RenderPlanDifferences(plan, text);
  RenderColumns(columns, text);
  RenderRows(rows, text);
  RenderRoute(route, text);
  RenderFinalTerms(final_terms, text);
  RenderValidation(validation, text);
  RenderCoefficients(*this, text);
  RenderPrediction(prediction, text);
  return text.str();
}

}  // namespace stepledger

