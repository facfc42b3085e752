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
//   validation   the k-fold RMSE and the holdout RMSE side by side when both audits record them;
//                when both ran the bootstrap, every term's inclusion frequency, old and new
//   models_differ true unless the verdict is "same model".

#include <cstddef>
#include <cstdint>
#include <filesystem>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include <nlohmann/json.hpp>

#include "stepledger/engine/csv.h"
#include "stepledger/engine/data_set.h"

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
  /// Names of the two audits in messages ("old.json: key 'model.terms': expected an array").
  std::string old_name = "old audit";
  std::string new_name = "new audit";
};

/// One key of the normalised plans whose values differ. The values are kept as the audits
/// record them (a plan value may be a string, a number, a list or null).
struct PlanDifference {
  std::string key;
  nlohmann::json old_value;
  nlohmann::json new_value;
};

/// The normalised plans compared key by key.
struct PlanComparisonPart {
  /// False when either audit records no normalised plan (then `differences` is empty).
  bool compared = false;
  std::vector<PlanDifference> differences;
};

/// A column present in both audits whose recorded type differs.
struct ColumnTypeChange {
  std::string column;
  std::string old_type;
  std::string new_type;
};

/// A numeric column that really moved. The summaries ({min, max, mean, sd}) are copied as the
/// audits record them, so that the `comparison` section reproduces them exactly.
struct MovedColumn {
  std::string column;
  nlohmann::json old_summary;
  nlohmann::json new_summary;
  /// (new mean - old mean) / old SD; empty when a mean is missing or the old SD is not positive.
  std::optional<double> mean_shift_in_old_sd;
  /// The larger of the mean's shift and the range's reach beyond the old one, in old SDs;
  /// empty when that is infinite (old SD 0 or undefined, or a value recorded on one side only).
  std::optional<double> shift_in_old_sd;
};

/// The data columns compared.
struct ColumnsComparisonPart {
  std::vector<std::string> added;
  std::vector<std::string> lost;
  std::vector<ColumnTypeChange> type_changed;
  std::vector<MovedColumn> moved;
  std::uint64_t numeric_compared = 0;
  /// CompareOptions::column_shift_in_old_sd the comparison used.
  double moved_threshold_in_old_sd = CompareOptions{}.column_shift_in_old_sd;
};

/// Rows used by each fit; empty when an audit does not record them.
struct RowsComparisonPart {
  std::optional<std::int64_t> old_rows_used;
  std::optional<std::int64_t> new_rows_used;
};

/// One step's move: its action ("add", "remove", ...) and term, each empty when not recorded.
struct RouteMove {
  std::optional<std::string> action;
  std::optional<std::string> term;
  bool operator==(const RouteMove& other) const { return action == other.action && term == other.term; }
  bool operator!=(const RouteMove& other) const { return !(*this == other); }
};

/// Where the two routes part.
struct RouteComparisonPart {
  bool same = true;
  /// Empty when the routes are the same.
  std::optional<std::size_t> first_difference_step;
  /// The moves at that step; empty when that route has no such step (or the routes agree).
  std::optional<RouteMove> old_move;
  std::optional<RouteMove> new_move;
};

/// Terms of the final models, each list in its model's own term order.
struct FinalTermsComparisonPart {
  std::vector<std::string> entered;  ///< in the new model, not the old
  std::vector<std::string> left;     ///< in the old model, not the new
  std::vector<std::string> kept;     ///< in both (old order)
};

/// One coefficient both final models have.
struct CoefficientChange {
  std::string name;
  std::optional<double> old_estimate;
  std::optional<double> new_estimate;
  std::optional<double> old_se;
  std::optional<double> new_se;
  /// (new - old) / old SE; empty when an estimate is missing or the old SE is not positive.
  std::optional<double> change_in_old_se;
  /// (new - old) / sqrt(old SE^2 + new SE^2); empty when undefined.
  std::optional<double> change_in_joint_se;
  /// |change_in_old_se| > CompareOptions::coefficient_mark_in_se.
  bool beyond_mark = false;
};

/// A candidate term's bootstrap inclusion frequency in each audit (unset: not a candidate there).
struct InclusionChange {
  std::string term;
  std::optional<double> old_frequency;
  std::optional<double> new_frequency;
};

/// The validation sections side by side. An audit without the section (an older format) or
/// without a part leaves that part not compared.
struct ValidationComparisonPart {
  bool folds_compared = false;      ///< both audits record the k-fold error
  std::optional<double> old_folds_rmse, new_folds_rmse;
  bool holdout_compared = false;    ///< both audits held rows out
  std::optional<double> old_holdout_rmse, new_holdout_rmse;
  bool inclusion_compared = false;  ///< both audits ran the bootstrap
  /// The old audit's candidate terms in its order, then the new audit's other terms.
  std::vector<InclusionChange> inclusion;
  /// The term whose frequency moved most (among terms in both), for the brief report.
  std::optional<std::size_t> largest_change;
};

/// The comparison of an old and a new audit as one value (what `compare` prints and `rerun`
/// records as the new audit's `comparison` section). A default-made value is "not run": no
/// seals, no differences, the cautious verdict kDifferentTerms and a prediction part that says
/// it was not computed.
struct AuditComparison {
  std::optional<std::string> old_seal;
  std::optional<std::string> old_data_sha256;
  std::optional<std::string> new_data_sha256;
  /// The two data fingerprints are equal (two missing ones count as equal, as recorded).
  bool same_data = false;
  PlanComparisonPart plan;
  ColumnsComparisonPart columns;
  RowsComparisonPart rows;
  RouteComparisonPart route;
  FinalTermsComparisonPart final_terms;
  /// Coefficients in both final models, in the old model's order.
  std::vector<CoefficientChange> coefficients;
  /// CompareOptions::coefficient_mark_in_se the comparison used.
  double coefficient_mark_in_se = CompareOptions{}.coefficient_mark_in_se;
  std::vector<std::string> coefficients_only_old;
  std::vector<std::string> coefficients_only_new;
  /// The PredictionComparison part as that function builds it ({available, ...}); kept as JSON
  /// because it is also copied from a recorded comparison of an earlier rerun.
  nlohmann::json prediction = {{"available", false}, {"reason", "not computed"}};
  ValidationComparisonPart validation;
  ComparisonVerdict verdict = ComparisonVerdict::kDifferentTerms;

  /// True unless the verdict is "same model".
  bool ModelsDiffer() const { return verdict != ComparisonVerdict::kSameModel; }
  /// The verdict line ("Verdict: same model (...)." ...), and when both audits ran the bootstrap
  /// the term whose inclusion frequency moved most.
  std::string BriefReport() const;
  /// The comparison as text for the terminal: the verdict first, then data, plan, columns,
  /// rows, route, terms, coefficients and the old model on the new rows.
  std::string FullReport() const;
  /// The `comparison` section of an audit and of `compare --json`.
  nlohmann::json ToJson() const;
};

/// The comparison of an old and a new audit (parsed). Throws InputError naming the audit and the
/// key when an audit lacks a section the comparison needs or holds a value of the wrong type
/// there (a recorded comparison.prediction included).
AuditComparison CompareAudits(const nlohmann::json& old_audit, const nlohmann::json& new_audit,
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
/// "reason": ...} when the old model cannot be rebuilt or the data lack its columns. new_data may
/// be a data set (engine/data_set.h): its files are priced in reading order; or columns in memory
/// (DataSet::columns), priced through the same evaluator a chunk of rows at a time
/// (engine/row_cells.h, ColumnRows).
nlohmann::json PredictionComparison(const nlohmann::json& old_audit, const nlohmann::json& new_audit,
                                    const DataSet& new_data, const CsvOptions& csv);

}  // namespace stepledger
