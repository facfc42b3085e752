#pragma once
// Comparing two runs (`stepledger compare A B`, and the `comparison` section that `rerun`
// writes into the new audit): what changed between an old audit and a new one.
//
//   columns      added, lost, type changed; numeric columns whose range or mean moved (the
//                mean's shift in units of the old standard deviation)
//   rows         rows used, old and new
//   route        the first step where the routes part (action or term), or that they agree
//   final_terms  terms that entered or left the final model, terms kept
//   coefficients for every coefficient in both final models: old and new estimate and SE, the
//                change in units of the old SE, and in units of sqrt(se_old^2 + se_new^2)
//   prediction   the old model's error on the new rows beside the new model's (needs the rows:
//                computed by rerun, or by compare --data; otherwise taken from B's recorded
//                comparison when B's parent is A, else null with the reason)
//   models_differ true when the final terms differ or any coefficient estimate differs by more
//                than the relative tolerance.

#include <filesystem>
#include <optional>
#include <string>

#include <nlohmann/json.hpp>

#include "stepledger/engine/csv.h"

namespace stepledger {

struct CompareOptions {
  /// Estimates agree when within this relative tolerance (as verify's replay). Default 1e-9.
  double relative_tolerance = 1e-9;
};

/// The comparison of an old and a new audit (parsed). Throws InputError naming the key when an
/// audit lacks a section the comparison needs.
nlohmann::json CompareAudits(const nlohmann::json& old_audit, const nlohmann::json& new_audit,
                             const CompareOptions& options = {});

/// The old audit's final model evaluated on the rows of a data file (the old normalised plan
/// applied to the new data): {rows, old_model_rmse, old_model_mean_error, new_model_rmse,
/// unseen_level_rows, response_transform}; new_model_rmse is sqrt(RSS/sum w) of the new audit.
/// Returns {"available": false, "reason": ...} when the old plan cannot be applied to the data.
nlohmann::json PredictionComparison(const nlohmann::json& old_audit, const nlohmann::json& new_audit,
                                    const std::filesystem::path& new_data, const CsvOptions& csv);

/// The comparison as text for the terminal.
std::string ComparisonReport(const nlohmann::json& comparison);

/// True when the comparison says the final models differ.
bool FinalModelsDiffer(const nlohmann::json& comparison);

}  // namespace stepledger
