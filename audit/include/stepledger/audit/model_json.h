#pragma once
// The `model` JSON shape shared by `fit --json`, `select --json` and the audit (CONTRACT.md):
//   { terms, n, k, rss, tss, r2, adj_r2, sigma, log_likelihood, aic, aicc, bic, f, f_p,
//     coefficients: [ {name, term, estimate, se, t, p, ci_low, ci_high, vif} ],
//     anova: { terms: [ {source, df, ss, ms, f, p} ], regression: {...}, residual: {...},
//              total: {...} } }
// plus additive keys: cp, df_residual, ss_regression (SST - SSE; format_version 1 called it
// ssr), status, intercept, rcond, alias_tolerance,
// refinement_passes, refinement_correction, refinement_stop (why refinement stopped:
// "not-refined", "converged", "not-shrinking" or "pass-limit"), aliased_columns, confidence_level,
// weight_sum, log_weight_sum.
// Undefined values (std::nullopt, and any non-finite number) are JSON null.

#include <nlohmann/json.hpp>

#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/fit.h"

namespace stepledger {

/// The contract's model object for a fit. Keys sort byte-wise (nlohmann::json), so the
/// text is deterministic.
nlohmann::json ModelToJson(const FitResult& fit);

/// A number, or null when undefined or not finite.
nlohmann::json NumberOrNull(const std::optional<double>& value);

/// A count held as a double (rows, degrees of freedom) as a JSON integer: `229`, never
/// `229.0`. The value must be a whole number (asserted); the residual df n - k may be negative.
nlohmann::json CountJson(double count);

/// `rows_dropped` of the data section (audit, `fit --json`): a list of {reason, column, rows}
/// in RowAccounting's order, e.g. [{"reason": "missing", "column": "battery_health_pct",
/// "rows": 6}, {"reason": "zero weight", "column": "units", "rows": 2}]; empty when no row
/// was dropped.
nlohmann::json RowsDroppedJson(const RowAccounting& accounting);

}  // namespace stepledger
