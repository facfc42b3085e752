#pragma once
// The `validation` object (CONTRACT.md) of the audit, `select --json` and `fit --json`, and its
// typed reader. Shape:
//   { folds:      { k, seed, rmse (null when undefined), undefined_reason?, residual_sd,
//                   per_fold: [ {fold, rows, weight, sse} ] },
//     holdout?:   { fraction, seed, rows, weight, rmse, mean_error, r2, rows_outside_ranges,
//                   rows_high_leverage,
//                   calibration: [ {decile, rows, mean_prediction, mean_observed} ] },
//     bootstrap?: { replicates, seed, inclusion: [ {term, frequency} ],
//                   sizes: [ {size, replicates} ], models: [ {terms, frequency, chosen} ],
//                   chosen_among_top,
//                   coefficients: [ {name, inclusion, conditional: [low, high] | null,
//                                    unconditional: [low, high]} ],
//                   substitutes: [ {first, second, together, first_only, second_only,
//                                   statistic} ] } }
// Counts (k, seeds, rows, fold, decile, size, replicates) are JSON integers; every other number
// keeps full precision; undefined numbers are null (model_json.h NumberOrNull).

#include <string_view>

#include <nlohmann/json.hpp>

#include "stepledger/run/validation.h"

namespace stepledger {

/// The contract's validation object of a run.
nlohmann::json ValidationToJson(const ValidationResult& validation);

/// Reads a validation object back (the inverse of ValidationToJson: a written result reads back
/// equal). Every key is type- and range-checked; throws InputError naming the key:
/// "SOURCE: key 'validation.folds.per_fold[3].sse': expected a number, found string".
ValidationResult ValidationFromJson(const nlohmann::json& validation, std::string_view source_name = "audit");

}  // namespace stepledger
