#pragma once
// Internal to the report: what the text and HTML renderings share, so that both say the same
// things from the same reading of the audit (report_common.cpp).

#include <cstdint>
#include <optional>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include <nlohmann/json.hpp>

#include "stepledger/report/report.h"

namespace stepledger::report_detail {

using json = nlohmann::json;

/// Throws InputError unless the document is a stepledger audit whose sections the report reads
/// have the expected JSON types (names the key, e.g. "steps[3].candidates").
void CheckAuditShape(const json& audit);

/// object[key], or a null value when object is not an object or has no such key.
const json& Get(const json& object, std::string_view key);
/// A number, or nullopt for null, missing or non-numbers.
std::optional<double> Number(const json& value);
/// A string as it is, a number or bool as JSON text, null as "".
std::string Text(const json& value);

/// A number with `significant` significant digits ("n/a" when undefined).
std::string Format(std::optional<double> value, int significant = 4);
/// A p-value: "< 1e-16" below that (common practice: beyond double's resolution of 1 - p).
std::string FormatP(std::optional<double> value);
/// An integer count with thousands separators.
std::string FormatCount(const json& value);
/// A data column's levels: "3 levels", and when there are at most max_listed, ": A B C"
/// (with counts: ": A (12) B (40) C (9)"). Empty for a column without levels.
std::string LevelsSummary(const json& column, std::size_t max_listed, bool with_counts);

/// "BIC", "AIC", "AICc", "adjusted R²", "Mallows' Cp", "partial F", "CV error".
std::string CriterionName(std::string_view code);
/// The name of what a route's criterion_value holds ("BIC", or "residual mean square" for
/// partial F), for axis labels.
std::string CriterionValueName(std::string_view code);
/// True for adjusted R² (the only criterion where a higher value is better).
bool HigherIsBetter(std::string_view code);
/// The response as modelled: "resale_price" or "log(resale_price)".
std::string ResponseLabel(const json& audit);

/// The plan in words: one sentence per line.
std::vector<std::string> PlanSentences(const json& audit);
/// (name, definition in words) for each candidate term of the normalised plan.
std::vector<std::pair<std::string, std::string>> TermDefinitions(const json& audit);

/// "+ cpu", "- age", "start", "stop" for a step.
std::string StepLabel(const json& step);

/// The best criterion value at each model size of an all-subsets audit, by size.
struct SubsetBest {
  std::int64_t size = 0;
  double score = 0;
  std::vector<std::string> terms;
};
std::vector<SubsetBest> BestSubsetBySize(const json& audit);

/// Thresholds for rows that stand out (common practice: Cook's distance above 4/n,
/// |standardised residual| above 3, leverage above 2k/n).
struct StandOutRules {
  double cooks = 0;
  double standardized_residual = 3;
  double leverage = 0;
  std::size_t n = 0;
};
StandOutRules MakeStandOutRules(const ReportDiagnostics& diagnostics);
struct StandOutRow {
  const RowDiagnostic* row = nullptr;
  std::vector<std::string> reasons;
};
/// Every row that crosses a threshold, in file order.
std::vector<StandOutRow> RowsThatStandOut(const ReportDiagnostics& diagnostics,
                                          const StandOutRules& rules);

/// (theoretical normal quantile, standardised residual) for every row with a defined
/// standardised residual, sorted; plotting positions (i - 3/8) / (n + 1/4) (Blom, common
/// practice), quantiles from Boost.Math's standard normal.
std::vector<std::pair<double, double>> NormalQuantilePairs(const ReportDiagnostics& diagnostics);

/// What the integrity block shows.
struct IntegrityFacts {
  std::string seal;
  std::optional<bool> seal_matches;      ///< recomputed over the document; nullopt without a seal
  bool signed_document = false;
  std::string signature_algorithm;
  std::string public_key;
  std::optional<bool> signature_consistent;  ///< against its own embedded public key
  bool has_parent = false;
  std::string parent_seal;
  std::string parent_created_at;
  std::string parent_data_sha256;
  std::string tool_version, tool_commit, tool_build, created_at, format_version;
  std::string genesis, route_digest, step_count;
};
IntegrityFacts ReadIntegrity(const json& audit);

/// A plain-text table: headers, rows, and which columns are right-aligned (numbers).
std::string TextTable(const std::vector<std::string>& headers,
                      const std::vector<std::vector<std::string>>& rows,
                      const std::vector<bool>& right_aligned, std::string_view indent = "  ");

/// How to get the diagnostics section, for a report rendered without them.
std::string DiagnosticsHowTo(const json& audit);

}  // namespace stepledger::report_detail
