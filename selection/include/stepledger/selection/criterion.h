#pragma once
// How a search scores a model: one criterion interface over the engine's formulas
// (engine/criteria.h, the convention of DESIGN.md "Criteria"). Nothing here looks at rows.
//
// Internally every score is "lower is better": AIC, AICc, BIC and Cp as they are, adjusted
// R^2 negated. partial-f is not a model score but a p-value rule (a term enters while its
// entry p-value is below entry_p, leaves while its exit p-value is above exit_p); as a model
// score (to rank all subsets of one size) it uses the residual mean square RSS/(n-k).
//
// Degenerate cases (a score is then undefined, and a search never takes such a model):
//  - n <= k: every criterion is undefined, even where a formula would give a number
//    (an exact fit says nothing about which terms matter);
//  - RSS = 0 (exact fit): log-likelihood, hence AIC, AICc, BIC, undefined;
//  - n - k - 2 <= 0: AICc undefined;
//  - TSS = 0: adjusted R^2 undefined;
//  - Cp without sigma^2 of the largest eligible model (or with n <= k there): undefined.
//
// The cross-validated criterion (cv) needs more than RSS: the model's columns, to refit on
// per-fold factors (engine/cross_validation.h). ScoreModel therefore receives the model's
// columns too. Its score is the k-fold RMSE sqrt(sum_f sse_f / sum_i w_i), lower is better
// and reported as it is; it is undefined when a column of the model is aliased in some fold's
// training rows (the reason names the design column and the fold). It does not use n <= k:
// a model that the training rows of every fold can fit has a held-out error.

#include <memory>
#include <optional>
#include <span>
#include <string>
#include <vector>

#include "stepledger/engine/criteria.h"
#include "stepledger/engine/cross_validation.h"
#include "stepledger/selection/plan.h"

namespace stepledger {

/// What every criterion may use, fixed for one search.
struct CriterionContext {
  double n = 0;                   ///< rows used
  double tss = 0;                 ///< about the (weighted) mean with an intercept, about 0 without
  bool intercept = true;
  double log_weight_sum = 0;      ///< sum of ln w_i (0 without weights)
  /// sigma^2 of the largest eligible model (all eligible terms); needed by Cp only.
  std::optional<double> full_sigma2;
  /// cv: the per-fold factors (not owned; must outlive the criterion). Needed by cv only.
  const CrossValidation* cross_validation = nullptr;
  /// cv: the design's column names, to name an aliased column in a reason (may be empty:
  /// the column's index is named then).
  std::vector<std::string> column_names;
};

/// One model to score: its design columns (model order), RSS (data units), and k.
struct ModelToScore {
  std::span<const std::size_t> columns;
  double rss = 0;
  double k = 0;  ///< coefficients including the intercept
};

/// A score, or why there is none.
struct Score {
  std::optional<double> value;  ///< internal, lower is better
  std::string undefined_reason; ///< when value is unset, e.g. "n <= k (n = 4, k = 5)"
  /// cv only: held-out weighted SSE per fold (fold order, data units); empty for the other
  /// criteria and when the score is undefined.
  std::vector<double> fold_sse;
  bool defined() const { return value.has_value(); }
};

class ModelCriterion {
 public:
  virtual ~ModelCriterion() = default;
  virtual Criterion kind() const = 0;
  /// True for partial-f: decisions follow entry_p / exit_p, not Score().
  virtual bool is_p_value_rule() const { return false; }
  /// Internal score of a model (lower is better). O(1) for the RSS-based criteria.
  virtual Score ScoreModel(const ModelToScore& model) const = 0;
  /// Internal score back to the value users read (adjusted R^2 un-negated).
  virtual double Reported(double internal_score) const { return internal_score; }
  /// Name of the reported value ("bic", "adj-r2", "residual mean square" for partial-f).
  virtual std::string ValueName() const { return ToString(kind()); }
};

/// The criterion of the plan. Cp without context.full_sigma2 scores every model as undefined,
/// saying why. kCv without context.cross_validation throws PlanError at "criterion" (the run
/// built no fold factors).
std::unique_ptr<ModelCriterion> MakeCriterion(Criterion criterion, const CriterionContext& context);

/// Relative tolerance under which two scores are equal (ties break by plan order).
inline constexpr double kTieRelativeTolerance = 1e-12;
/// |a - b| <= kTieRelativeTolerance * max(|a|, |b|) (and both equal when both are 0).
bool ScoresTie(double a, double b);

/// A criterion value for people (route rules, route tables, reports): fixed point with a fixed
/// number of decimals, so that the close values of two candidates stay apart — four for adjusted
/// R² (a share), two for the others (AIC, BIC, Cp, residual mean square, CV error). "n/a" when
/// undefined. (engine/number_format.h holds the rest of the policy.)
std::string FormatCriterionValue(Criterion criterion, std::optional<double> value);

}  // namespace stepledger
