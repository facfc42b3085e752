#pragma once
// The `model` JSON shape shared by `fit --json`, `select --json` and the audit (CONTRACT.md):
//   { terms, n, k, rss, tss, r2, adj_r2, sigma, log_likelihood, aic, aicc, bic, f, f_p,
//     coefficients: [ {name, term, estimate, se, t, p, ci_low, ci_high, vif} ],
//     anova: { terms: [ {source, df, ss, ms, f, p} ], regression: {...}, residual: {...},
//              total: {...} } }
// plus additive keys: cp, df_residual, ssr, status, intercept, rcond, alias_tolerance,
// refinement_passes, refinement_correction, aliased_columns, confidence_level,
// weight_sum, log_weight_sum.
// Undefined values (std::nullopt, and any non-finite number) are JSON null.

#include <nlohmann/json.hpp>

#include "stepledger/engine/fit.h"

namespace stepledger {

/// The contract's model object for a fit. Keys sort byte-wise (nlohmann::json), so the
/// text is deterministic.
nlohmann::json ModelToJson(const FitResult& fit);

/// A number, or null when undefined or not finite.
nlohmann::json NumberOrNull(const std::optional<double>& value);

}  // namespace stepledger
