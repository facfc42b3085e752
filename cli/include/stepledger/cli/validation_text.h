#pragma once
// The validation results as terminal text for `select` and `fit` (the JSON is the audit's
// validation object, audit/validation_json.h). Numbers follow engine/number_format.h.

#include <optional>
#include <string>

#include "stepledger/run/validation.h"

namespace stepledger::cli {

/// "Error on unseen rows: 10-fold RMSE 26.50 beside the in-sample residual SD 25.12 (fold seed
/// 1)" and a newline: the k-fold error beside the in-sample residual SD, for the summary.
/// residual_sd is shown when the validation does not carry its own; an undefined RMSE shows
/// "n/a" and the reason.
std::string ValidationSummaryText(const ValidationResult& validation, std::optional<double> residual_sd);

/// The holdout's rows, RMSE, mean error, R², extrapolation counts and calibration table, and the
/// bootstrap's inclusion frequencies, model sizes and most frequent models (and whether the
/// chosen model is among them); empty when the plan asked for neither.
std::string ValidationDetailText(const ValidationResult& validation);

}  // namespace stepledger::cli
