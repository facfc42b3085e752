#pragma once
// The final model of an audit, rebuilt from the audit alone so that `predict` can price new
// rows and `report --data` can diagnose the fitted rows without rerunning the selection.
//
// The audit's `prediction` section holds what the `model` section does not:
//   prediction: {
//     columns:   design column names of the model, model order (the intercept first),
//     triangle:  R11 of the model in the factor's scaled units, k rows of k numbers (row-major,
//                zeros below the diagonal), and scales: the k column scales then the response's
//                (FitResult::model_triangle / model_scales): x'(X'WX)^-1 x = ||R11^-T D x||^2,
//                a sum of squares, so leverages and standard errors have no cancellation;
//     ranges:    [{term, column, kind, min, max}]: for every numeric, log and power term that the
//                model uses (directly or as a part of a product), the range of the term's design
//                value (the value, its natural log, its power) over the rows used;
//     max_unit_leverage, max_unit_leverage_line: the largest x_i'(X'WX)^-1 x_i over the rows
//                used (the leverage at unit weight: h_ii / w_i) and the line of that row;
//     max_unit_leverage_file: for a data set of several files only, the name of that row's file
//                (its lines start again in every file); absent for one file;
//     smearing_factor: with a logged response, the mean over the rows used of
//                exp(sqrt(w_i) e_i) (the smearing estimate of E[exp(error)]); else null
//   }
// Values missing because the run had no diagnostics pass are null (ranges empty).

#include <cstdint>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include <nlohmann/json.hpp>

#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/fit.h"
#include "stepledger/engine/model_support.h"
#include "stepledger/engine/prediction.h"
#include "stepledger/engine/profile.h"
#include "stepledger/selection/plan.h"

namespace stepledger {

/// The `prediction` section for a run (the shape above).
/// set_files: a data set's file names in reading order (SetFileNames), empty for one file.
nlohmann::json PredictionSectionJson(const FitResult& fit, const Design& design,
                                     const PredictionSupport& support,
                                     const std::vector<std::string>& set_files = {});

/// The final model of an audit, rebuilt.
struct FittedModel {
  Plan plan;            ///< from plan.normalised (terms explicit, baselines chosen)
  DataProfile profile;  ///< from data.columns: names in header order, kinds, ranges, levels
  Design design;        ///< BuildDesign(plan.design, profile): the run's design, same columns
  /// The final model: terms, term_indices, columns (indices into design.columns), beta,
  /// coefficients, n, k, df_residual, rss, intercept, criteria (sigma, r2, ...),
  /// confidence_level, status, model_triangle and model_scales. Not filled: anova,
  /// xtwx_inverse, covariance.
  FitResult fit;
  PredictionSupport support;
  std::string data_file_name;  ///< data.file
  std::string data_sha256;     ///< data.sha256
  std::vector<std::string> missing_tokens;  ///< data.missing
};

/// Rebuilds the final model of a parsed audit (ReadAuditFile). source_name (the audit's file
/// name) starts every message. Throws InputError naming the JSON key ("prediction.triangle")
/// when a needed key is missing or malformed, or when the rebuilt design's columns do not
/// match the audit's design section; an audit written before the `prediction` section existed
/// gets a message saying to rerun it with this version. The recorded plan is read and rebuilt
/// within limits (LimitError past one: a plan file's limits apply to a recorded plan too).
FittedModel FittedModelFromAudit(const nlohmann::json& audit, std::string_view source_name,
                                 const InputLimits& limits = {});

/// The normalised plan that the audit's plan.verbatim gives on its recorded columns
/// (data.columns): what the run wrote as plan.normalised, derived from what a replay runs.
/// Throws InputError naming the key when the plan or the columns cannot be read.
nlohmann::json NormalisedPlanFromVerbatim(const nlohmann::json& audit, std::string_view source_name,
                                         const InputLimits& limits = {});

/// plan.normalised as FittedModelFromAudit reads it (PlanToJson of the plan it reads: keys
/// an older audit leaves out at their defaults). Throws InputError naming the key.
nlohmann::json NormalisedPlanAsRead(const nlohmann::json& audit, std::string_view source_name,
                                    const InputLimits& limits = {});

/// The model for pricing new rows (engine/prediction.h): the design restricted to the terms
/// the model needs (TermsNeededByModel), so that the rows need neither the response nor the
/// columns of candidates the selection left out; the fit, the ranges, the largest unit leverage
/// and the smearing factor. An intercept-only model reads no column.
PricingModel MakePricingModel(const FittedModel& fitted);

}  // namespace stepledger
