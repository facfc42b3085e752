#include "stepledger/run/cautions.h"

#include <algorithm>
#include <cmath>
#include <utility>

#include "stepledger/engine/data_set.h"
#include "stepledger/engine/number_format.h"
#include "stepledger/selection/criterion.h"

namespace stepledger {

namespace {

std::string JoinNames(const std::vector<std::string>& names) {
  std::string text;
  for (const std::string& name : names) text += (text.empty() ? "" : ", ") + name;
  return text;
}

Caution PostSelectionInference(const RunResult& run) {
  const std::size_t candidates = run.design.terms.size();
  Caution caution;
  caution.kind = CautionKind::kPostSelectionInference;
  caution.message =
      "The p-values, standard errors and confidence intervals of the selected model ignore the "
      "selection (" + std::string(ToString(run.search.method)) + " by " +
      ToString(run.search.criterion) + " over " + FormatCount(static_cast<std::int64_t>(candidates)) +
      " candidate terms) and are optimistic; judge the model on held-out data or by "
      "cross-validation.";
  caution.candidate_terms = candidates;
  return caution;
}

// The largest VIF of the final model, the ones above the threshold, and ties in the route.
std::optional<Caution> Collinearity(const RunResult& run) {
  const CoefficientEstimate* largest = nullptr;
  std::vector<std::string> high;
  for (const CoefficientEstimate& coefficient : run.fit.coefficients) {
    if (!coefficient.vif || !std::isfinite(*coefficient.vif)) continue;
    if (largest == nullptr || *coefficient.vif > *largest->vif) largest = &coefficient;
    if (*coefficient.vif > run.options.vif_caution) {
      high.push_back(coefficient.name + " (" + FormatQuantity(coefficient.vif) + ")");
    }
  }
  std::vector<std::string> tied_steps;
  for (const RouteStep& step : run.search.steps) {
    if (!step.ties.empty()) {
      tied_steps.push_back("step " + std::to_string(step.index) + ": " + step.term + " tied with " +
                           JoinNames(step.ties));
    }
  }
  if (largest == nullptr && tied_steps.empty()) return std::nullopt;
  Caution caution;
  caution.kind = CautionKind::kCollinearity;
  caution.message = "With correlated predictors the route is unstable: terms can trade places on "
                    "slightly different data.";
  if (largest != nullptr) {
    caution.message += " Largest VIF in the final model: " + largest->name + " " +
                       FormatQuantity(largest->vif) + ".";
    caution.largest_vif_column = largest->name;
    caution.largest_vif = largest->vif;
  }
  if (!high.empty()) {
    caution.message += " VIF above " + FormatQuantity(run.options.vif_caution) + ": " +
                       JoinNames(high) + ".";
  }
  if (!tied_steps.empty()) caution.message += " Ties broken by plan order: " + JoinNames(tied_steps) + ".";
  caution.vif_threshold = run.options.vif_caution;
  caution.ties = std::move(tied_steps);
  return caution;
}

// The ranges of the source columns of the final terms, and the largest leverage. Over the rows
// used when the diagnostics pass recorded them (the ranges predict checks: a numeric term's
// values are the column's, a log term's bounds are exp of the recorded ones); else over every row
// read (the profile), which can only be wider.
Caution Extrapolation(const RunResult& run) {
  auto range_over_rows_used = [&run](const std::string& column) -> std::optional<std::pair<double, double>> {
    const TermRange* log_range = nullptr;
    for (const TermRange& range : run.prediction_support.ranges) {
      if (range.column != column) continue;
      if (range.kind == TermKind::kNumeric) return std::pair{range.min, range.max};
      if (range.kind == TermKind::kLog) log_range = &range;
    }
    if (log_range != nullptr) return std::pair{std::exp(log_range->min), std::exp(log_range->max)};
    return std::nullopt;
  };
  Caution caution;
  caution.kind = CautionKind::kExtrapolation;
  std::vector<std::string> seen;
  std::string range_text;
  for (std::size_t term_index : run.fit.term_indices) {
    const DesignTerm& term = run.design.terms[term_index];
    if (!IsRangedKind(term.kind)) continue;
    if (std::find(seen.begin(), seen.end(), term.source_column) != seen.end()) continue;
    seen.push_back(term.source_column);
    const ColumnProfile* column = run.profile.Find(term.source_column);
    if (column == nullptr) continue;
    const auto used = range_over_rows_used(column->name);
    QuotedRange range{column->name, used ? used->first : column->min,
                      used ? used->second : column->max, used.has_value()};
    range_text += (range_text.empty() ? "" : ", ") + range.column + " " + FormatQuantity(range.min) +
                  " to " + FormatQuantity(range.max);
    caution.ranges.push_back(std::move(range));
  }
  caution.message = "Predictions for rows outside the ranges of these data";
  if (!range_text.empty()) caution.message += " (" + range_text + ")";
  if (run.max_leverage) {
    caution.message += " or with leverage above " + FormatQuantity(run.max_leverage) +
                       " (the largest here, " + RowPlaceText(run.max_leverage_line, run.max_leverage_file, SetFileNames(run)) + ")";
  }
  caution.message += " are extrapolations and are flagged.";
  caution.max_leverage = run.max_leverage;
  return caution;
}

// Final-model terms that few replicates chose, and the substitute pairs: the route could have
// gone another way on a slightly different sample.
std::optional<Caution> SelectionStability(const RunResult& run) {
  if (!run.validation.bootstrap) return std::nullopt;
  const BootstrapValidation& bootstrap = *run.validation.bootstrap;
  Caution caution;
  caution.kind = CautionKind::kSelectionStability;
  std::vector<std::string> rare_text;
  for (const std::string& term : run.fit.terms) {
    const auto found = std::find_if(bootstrap.inclusion.begin(), bootstrap.inclusion.end(),
                                    [&term](const TermInclusion& entry) { return entry.term == term; });
    if (found == bootstrap.inclusion.end() || found->frequency >= kStableInclusionShare) continue;
    caution.rarely_chosen.push_back(*found);
    rare_text.push_back(term + " (" + FormatPercent(found->frequency) + ")");
  }
  std::vector<std::string> pair_text;
  for (const SubstitutePair& pair : bootstrap.substitutes) {
    pair_text.push_back(pair.first + " and " + pair.second + " (together in " + FormatPercent(pair.together) +
                        ", one without the other in " + FormatPercent(pair.first_only + pair.second_only) + ")");
  }
  if (rare_text.empty() && pair_text.empty()) return std::nullopt;
  const std::string replicates = FormatCount(static_cast<std::int64_t>(bootstrap.settings.replicates));
  caution.message = "Rerun on " + replicates + " bootstrap samples of these rows, the selection often chose otherwise.";
  if (!rare_text.empty()) {
    caution.message += " Terms of the final model chosen in fewer than " + FormatPercent(kStableInclusionShare) +
                       " of the samples: " + JoinNames(rare_text) + ".";
  }
  if (!pair_text.empty()) {
    caution.message += " Terms that stand in for each other: " + JoinNames(pair_text) + ".";
  }
  caution.message += " Do not read the choice between them as a finding.";
  caution.substitutes = bootstrap.substitutes;
  caution.replicates = bootstrap.settings.replicates;
  return caution;
}

// The model does clearly worse on the held-out rows than its in-sample fit says.
std::optional<Caution> HoldoutError(const RunResult& run) {
  if (!run.validation.holdout || !run.validation.holdout->rmse || !run.fit.criteria.sigma) return std::nullopt;
  const HoldoutValidation& holdout = *run.validation.holdout;
  const double sigma = *run.fit.criteria.sigma;
  if (!(sigma > 0) || !(*holdout.rmse > kHoldoutErrorRatio * sigma)) return std::nullopt;
  Caution caution;
  caution.kind = CautionKind::kHoldoutError;
  caution.message = "On the " + FormatCount(static_cast<std::int64_t>(holdout.rows)) +
                    " held-out rows the RMSE is " + FormatQuantity(holdout.rmse) + ", " +
                    FormatPercent(*holdout.rmse / sigma - 1) + " above the in-sample residual SD of " +
                    FormatQuantity(sigma) + " (more than " + FormatPercent(kHoldoutErrorRatio - 1) +
                    ", a common-practice threshold): the model prices unseen rows worse than its fit suggests.";
  caution.holdout_rmse = holdout.rmse;
  caution.residual_sd = sigma;
  caution.holdout_rows = holdout.rows;
  return caution;
}

}  // namespace

std::string_view ToString(CautionKind kind) {
  switch (kind) {
    case CautionKind::kPostSelectionInference: return "post-selection-inference";
    case CautionKind::kCollinearity: return "collinearity";
    case CautionKind::kSelectionStability: return "selection-stability";
    case CautionKind::kHoldoutError: return "holdout-error";
    case CautionKind::kExtrapolation: return "extrapolation";
    case CautionKind::kAssociation: return "association";
    case CautionKind::kExcludedTerms: return "excluded-terms";
    case CautionKind::kNoResidualDf: return "no-residual-df";
  }
  return "unknown";
}

std::vector<Caution> ComputeCautions(const RunResult& run) {
  std::vector<Caution> cautions;
  if (run.search.method != Method::kNone) cautions.push_back(PostSelectionInference(run));
  if (auto collinearity = Collinearity(run)) cautions.push_back(std::move(*collinearity));
  if (auto stability = SelectionStability(run)) cautions.push_back(std::move(*stability));
  cautions.push_back(Extrapolation(run));
  if (auto holdout = HoldoutError(run)) cautions.push_back(std::move(*holdout));

  Caution association;
  association.kind = CautionKind::kAssociation;
  // fit (method none) selects nothing; the caution speaks of the model's terms either way.
  association.message =
      std::string(run.search.method == Method::kNone ? "A term of the model" : "A selected term") +
      " is an association in these data, not a cause. In pricing, protected "
      "characteristics and their proxies must not be used; local law and professional standards "
      "govern.";
  cautions.push_back(std::move(association));

  if (!run.search.excluded.empty() || !run.fit.aliased_columns.empty()) {
    Caution excluded;
    excluded.kind = CautionKind::kExcludedTerms;
    for (const ExcludedTerm& term : run.search.excluded) excluded.terms.push_back(term.term + ": " + term.reason);
    for (const std::string& column : run.fit.aliased_columns) excluded.terms.push_back(column + ": aliased");
    excluded.message = "Left out of the search or the fit: " + JoinNames(excluded.terms) + ".";
    cautions.push_back(std::move(excluded));
  }
  if (run.fit.status == FitStatus::kNoResidualDf) {
    Caution no_df;
    no_df.kind = CautionKind::kNoResidualDf;
    no_df.message = "No residual degrees of freedom (n <= k): no standard errors or tests for the "
                    "final model.";
    cautions.push_back(std::move(no_df));
  }
  return cautions;
}

}  // namespace stepledger
