#pragma once
// Internal to the report: reading the audit for BuildReportModel (report_common.cpp), and the
// pieces the model builders share. The back ends never read the audit: they see the model.

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <optional>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include <nlohmann/json.hpp>

#include "stepledger/report/report.h"
#include "stepledger/run/validation.h"

namespace stepledger::report_detail {

using json = nlohmann::json;

/// Throws InputError unless the document is a stepledger audit whose sections the report reads
/// have the expected JSON types (names the key, e.g. "steps[3].candidates").
void CheckAuditShape(const json& audit);

/// object[key], or a null value when object is not an object or has no such key.
const json& Get(const json& object, std::string_view key);
/// A number, or nullopt for null, missing or non-numbers.
std::optional<double> Number(const json& value);
/// An integer count (a JSON integer or an integral double such as 16.0), or nullopt.
std::optional<std::int64_t> Count(const json& value);
/// A string as it is, a number or bool as JSON text, null as "".
std::string Text(const json& value);
/// "a, b, c"; "the intercept alone" for no terms (ModelTermsText, run/validation.h).
std::string JoinTerms(const json& terms);

/// A data column's levels: "3 levels", and when there are at most max_listed, ": A B C"
/// (with counts: ": A (12) B (40) C (9)"). Empty for a column without levels.
std::string LevelsSummary(const json& column, std::size_t max_listed, bool with_counts);

/// "BIC", "AIC", "AICc", "adjusted R²", "Mallows' Cp", "partial F", "CV error".
std::string CriterionName(std::string_view code);
/// True for adjusted R² (the only criterion where a higher value is better).
bool HigherIsBetter(std::string_view code);
/// True for partial F, whose decisions are p-values against entry_p/exit_p.
bool IsPValueRule(std::string_view code);
/// The response as modelled: "resale_price" or "log(resale_price)".
std::string ResponseLabel(const json& audit);
/// The model in words: "log(resale_price) explained by age, memory, weighted by units"
/// ("explained by the intercept alone" for no terms).
std::string ModelStatement(const json& audit);
/// The outcome in words that match the rule that stopped the search (for partial F: which
/// threshold, entry_p or exit_p; otherwise the criterion).
std::string OutcomeInWords(const json& audit);

/// The plan in words: one sentence per line.
std::vector<std::string> PlanSentences(const json& audit);
/// (name, definition in words) for each candidate term of the normalised plan.
std::vector<std::pair<std::string, std::string>> TermDefinitions(const json& audit);

/// "add cpu", "remove age", "start", "stop" for a step or a candidate.
std::string MoveLabel(std::string_view action, std::string_view term);
std::string StepLabel(const json& step);

/// The best criterion value at each model size of an all-subsets audit, by size.
struct SubsetBest {
  std::int64_t size = 0;
  double score = 0;
  std::vector<std::string> terms;
};
std::vector<SubsetBest> BestSubsetBySize(const json& audit);

/// What the integrity block shows.
struct IntegrityFacts {
  std::string seal;
  std::optional<bool> seal_matches;      ///< recomputed over the document; nullopt without a seal
  bool signed_document = false;
  std::string signature_algorithm;
  std::string public_key;  ///< how the audit names its key: "key thumbprint (RFC 7638) ..." or "public key HEX"
  std::optional<bool> signature_consistent;  ///< against its own embedded public key
  bool has_parent = false;
  std::string parent_seal;
  std::string parent_created_at;
  std::string parent_data_sha256;
  std::string tool_version, tool_commit, tool_build, created_at, format_version;
  std::string genesis, route_digest, step_count;
};
IntegrityFacts ReadIntegrity(const json& audit);

/// How to get the diagnostics section, for a report rendered without them.
std::string DiagnosticsHowTo(const json& audit);

// ---- rows that stand out -----------------------------------------------------------------

/// Why a row stands out, in words: "Cook's D > 0.02; leverage > 0.1" (thresholds from
/// engine/diagnostics.h, common practice).
std::string StandOutReasons(const RowDiagnostic& row, const StandOutThresholds& thresholds);
/// The rows that stand out among the diagnostics' three largest-first lists (leverage,
/// |Cook's distance|, |standardised residual|), each once, largest Cook's distance first
/// (undefined, leverage 1, before all; ties by row index). At most 3 x kDiagnosticsTopRows.
std::vector<RowDiagnostic> ListedRowsThatStandOut(const DiagnosticsResult& result);

/// Criteria and estimates keep six significant digits: successive steps of a route often differ
/// in the fifth.
inline constexpr int kCriterionDigits = 6;

/// The top of a −log10(p) axis: p-values below 1e-16 (beyond double's resolution of 1 − p,
/// common practice; underflow to 0 included) are drawn at 16 and say so in their title, so
/// that one overwhelming term cannot squash the entry_p and exit_p lines into the axis.
inline constexpr double kMinusLog10Cap = 16;

/// −log10(p) capped at kMinusLog10Cap, the height of a p-value on the report's charts; nullopt
/// for an undefined or negative p.
inline std::optional<double> MinusLog10(std::optional<double> p) {
  if (!p || !(*p >= 0)) return std::nullopt;
  if (*p <= 0) return kMinusLog10Cap;
  return std::min(kMinusLog10Cap, -std::log10(*p));
}

/// The route, the candidates at each step, all subsets (report_route_model.cpp).
ReportSection RouteSection(const json& audit);
ReportSection CandidatesSection(const json& audit);
std::optional<ReportSection> SubsetsSection(const json& audit);

/// The validation section (report_validation_model.cpp); nullopt for an audit without one.
/// Throws InputError naming the key when the section is not the contract's shape.
std::optional<ReportSection> ValidationSection(const json& audit);

/// The diagnostics section (report_diagnostics_model.cpp).
ReportSection DiagnosticsSection(const json& audit, const ReportDiagnostics* diagnostics,
                                 const ReportOptions& options);

/// A plain-text table: headers, rows, and which columns are right-aligned (numbers).
std::string TextTable(const std::vector<std::string>& headers,
                      const std::vector<std::vector<std::string>>& rows,
                      const std::vector<bool>& right_aligned, std::string_view indent = "  ");

}  // namespace stepledger::report_detail
