#pragma once
// Comparing two runs (`stepledger compare A B`, and the `comparison` section that `rerun`
// writes into the new audit): what changed between an old audit and a new one.
//
//   verdict      one of three kinds (ComparisonVerdict), judged on the final models alone:
//                "same model" (the same terms and every estimate within the relative
//                tolerance), "same terms, refitted coefficients" (the same terms, some
//                estimate moved), "different terms" (a term entered or left)
//   plan         keys of the normalised plans whose values differ: method, criterion,
//                entry_p, exit_p, max_terms, terms, ... ({key, old, new}); a key that one
//                audit does not record (an older format) is not compared
//   columns      added, lost, type changed; numeric columns that really moved: the mean
//                shifted by more than column_shift_in_old_sd old standard deviations, or the
//                new range reaches beyond the old one by more than that at either end (a
//                narrower range is sampling noise of the extremes and is not listed)
//   rows         rows used, old and new
//   route        the first step where the routes part (action or term), or that they agree
//   final_terms  terms that entered or left the final model, terms kept
//   coefficients for every coefficient in both final models: old and new estimate and SE, the
//                change in units of the old SE (marked `beyond_mark` when its size exceeds
//                coefficient_mark_in_se), and in units of sqrt(se_old^2 + se_new^2)
//   prediction   the old model priced on the new rows (PredictionComparison) beside the new
//                model's error; else taken from B's recorded comparison when B's parent is A,
//                else {available: false, reason}
//   models_differ true unless the verdict is "same model".

#include <filesystem>
#include <optional>
#include <string>

#include <nlohmann/json.hpp>

#include "stepledger/engine/csv.h"

namespace stepledger {

/// What the final models of two audits have in common. Exit statuses (compare): kSameModel
/// exits 0, the two others exit 1.
enum class ComparisonVerdict {
  kSameModel,             ///< the same terms, every estimate within the relative tolerance
  kSameTermsRefitted,     ///< the same terms, some estimate moved beyond the tolerance
  kDifferentTerms,        ///< a term entered or left the final model
};
/// "same model", "same terms, refitted coefficients", "different terms".
const char* ToString(ComparisonVerdict verdict);
std::optional<ComparisonVerdict> ComparisonVerdictFromString(std::string_view text);

struct CompareOptions {
  /// Estimates agree when within this relative tolerance (as verify's replay). Default 1e-9.
  double relative_tolerance = 1e-9;
  /// A numeric column is listed as moved when its mean moved, or its range reaches beyond the
  /// old range, by more than this many old standard deviations (any such change when the old
  /// SD is 0 or undefined). Default 0.1 (common practice: a tenth of an SD is below what a price model
  /// notices).
  double column_shift_in_old_sd = 0.1;
  /// A coefficient change larger than this many old standard errors is marked. Default 2
  /// (common practice: about a 95% two-sided band).
  double coefficient_mark_in_se = 2;
};

/// The comparison of an old and a new audit (parsed). Throws InputError naming the key when an
/// audit lacks a section the comparison needs.
nlohmann::json CompareAudits(const nlohmann::json& old_audit, const nlohmann::json& new_audit,
                             const CompareOptions& options = {});

/// The old audit's final model priced on the rows of a data file through the same path as
/// `predict` (FittedModelFromAudit, MakePricingModel, PredictionRowEvaluator, Predictor), with
/// the response read from the same rows: {available, rows_read, rows (priced and with a usable
/// response), not_priced: {unknown-level, missing, invalid-value}, response_unusable,
/// old_model_rmse, old_model_mean_error, new_model_rmse, response_transform, note}. A row
/// with a level the old model never saw is not priced and counted under unknown-level, as
/// predict does. Errors are observed minus predicted on the scale the model was fitted on,
/// weighted by the plan's weights. new_model_rmse is sqrt(RSS / sum w) of the new audit.
/// One pass over the rows; memory does not grow with them. Returns {"available": false,
/// "reason": ...} when the old model cannot be rebuilt or the data lack its columns.
nlohmann::json PredictionComparison(const nlohmann::json& old_audit, const nlohmann::json& new_audit,
                                    const std::filesystem::path& new_data, const CsvOptions& csv);

/// The comparison as text for the terminal: the verdict first.
std::string ComparisonReport(const nlohmann::json& comparison);

/// The verdict a comparison records (kDifferentTerms when it records none).
ComparisonVerdict VerdictOf(const nlohmann::json& comparison);

/// True when the comparison says the final models differ (verdict other than "same model").
bool FinalModelsDiffer(const nlohmann::json& comparison);

}  // namespace stepledger
