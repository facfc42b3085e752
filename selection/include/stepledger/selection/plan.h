#pragma once
// A plan: what to model (the engine's DesignSpec) and how to search (SearchOptions).
// The plan file's JSON form is read and written by audit/plan_file.h; this header knows no JSON.

#include <cstdint>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "stepledger/engine/design.h"
#include "stepledger/engine/resampling.h"

namespace stepledger {

enum class Method { kForward, kBackward, kStepwise, kAllSubsets, kNone };
enum class Criterion { kAdjR2, kAic, kAicc, kBic, kCp, kPartialF, kCv };

/// Contract names: "forward", "backward", "stepwise", "all-subsets", "none".
const char* ToString(Method method);
std::optional<Method> MethodFromString(std::string_view text);
/// Contract names: "adj-r2", "aic", "aicc", "bic", "cp", "partial-f", "cv".
const char* ToString(Criterion criterion);
std::optional<Criterion> CriterionFromString(std::string_view text);

struct SearchOptions {
  /// Search method. Default: stepwise.
  Method method = Method::kStepwise;
  /// Score of a model. Default: BIC (consistent; favours small, stable pricing models).
  Criterion criterion = Criterion::kBic;
  /// Terms in every model (besides the intercept).
  std::vector<std::string> keep;
  /// Terms in no model.
  std::vector<std::string> never;
  /// partial-f: a term enters when its entry p-value is below this. In (0, 1). Default 0.05.
  double entry_p = 0.05;
  /// partial-f: a term leaves when its exit p-value is above this. In (0, 1), and for stepwise
  /// not below entry_p (else the search can cycle). Default 0.10.
  double exit_p = 0.10;
  /// A product or power only with its parts in the model. Default: true.
  bool hierarchy = true;
  /// Largest number of terms (besides the intercept); nullopt: no limit.
  std::optional<std::size_t> max_terms;
  /// all-subsets: models kept per size (>= 1). Default 3.
  std::size_t best_per_size = 3;
  /// all-subsets: relative tolerance of the branch and bound, 0 <= tau < 1. Default 0, an exact
  /// search. With tau > 0 a subtree is cut once it cannot beat the kept models of any of its
  /// sizes by more than the fraction tau of their RSS, and the r-th listed model of each size
  /// then has an RSS at most (1 + tau) times that of the r-th best model of that size (README
  /// "All subsets"). Such a search runs on one thread, so that its list depends only on the data
  /// and the plan.
  double subset_tolerance = 0;
  /// Cross-validation folds (2..100; engine/resampling.h): the k-fold error of the final model
  /// of every criterion, and the score of criterion cv. Default 10.
  int folds = 10;
  /// Seed of the fold assignment (engine/resampling.h). Any unsigned 64-bit integer. Default 1.
  std::uint64_t seed = 1;
  /// Rows held out of every selection statistic and used to judge the final model (the plan's
  /// "holdout" object); none by default.
  std::optional<HoldoutSettings> holdout;
  /// Poisson bootstrap replicates of the whole selection (the plan's "bootstrap" object); none
  /// by default.
  std::optional<BootstrapSettings> bootstrap;
  bool operator==(const SearchOptions&) const = default;
};

struct Plan {
  DesignSpec design;
  SearchOptions search;
  /// Cell texts meaning "missing"; the plan's "missing" key. Default: empty and "NA".
  std::vector<std::string> missing_tokens = {"", "NA"};
  bool operator==(const Plan&) const = default;
};

}  // namespace stepledger
