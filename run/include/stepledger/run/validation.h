#pragma once
// What a run learns about its final model on rows it did not fit, and about how stable its
// selection is (the audit's `validation` section, CONTRACT.md): the k-fold error of the final
// model (always), the holdout's error and calibration (when the plan holds rows out) and the
// Poisson bootstrap's inclusion frequencies (when the plan asks for replicates). Plain values:
// run/run_plan.h fills them, the audit, the report and the terminal render them.
//
// Errors are observed minus predicted (a positive mean error: the model prices too low). SSE and
// RMSE are weighted by the plan's weights where there are any.

#include <cstddef>
#include <cstdint>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "stepledger/engine/resampling.h"

namespace stepledger {

/// A model's terms for people, one wording everywhere (terminal, report): "a, b, c", or "the
/// intercept alone" for a model without terms.
inline std::string ModelTermsText(const std::vector<std::string>& terms) {
  if (terms.empty()) return "the intercept alone";
  std::string text;
  for (const std::string& term : terms) text += (text.empty() ? "" : ", ") + term;
  return text;
}

/// One fold of the final model's k-fold error.
struct FoldOutcome {
  std::size_t fold = 0;        ///< 0-based
  std::uint64_t rows = 0;      ///< used rows in the fold
  double weight = 0;           ///< their weight sum (= rows without weights)
  double sse = 0;              ///< held-out weighted SSE of the model fitted without this fold
  bool operator==(const FoldOutcome&) const = default;
};

struct FoldValidation {
  FoldSettings settings;
  /// sqrt(sum sse / sum weight); unset when some fold's training rows cannot fit the model.
  std::optional<double> rmse;
  std::string undefined_reason;   ///< why rmse is unset
  /// The in-sample residual SD of the same model (sigma, with n - k), shown beside rmse.
  std::optional<double> residual_sd;
  std::vector<FoldOutcome> per_fold;  ///< fold order
  bool operator==(const FoldValidation&) const = default;
};

/// One decile of prediction among the held-out rows.
struct CalibrationBin {
  std::size_t decile = 0;      ///< 1..10 (1: the lowest predictions)
  std::uint64_t rows = 0;
  double mean_prediction = 0;  ///< weighted means
  double mean_observed = 0;
  bool operator==(const CalibrationBin&) const = default;
};

struct HoldoutValidation {
  HoldoutSettings settings;
  std::uint64_t rows = 0;        ///< held-out rows that could be priced (no missing cell, weight > 0)
  double weight = 0;
  std::optional<double> rmse;    ///< unset with no row
  std::optional<double> mean_error;
  /// 1 - SSE / (weighted SS about the holdout's own weighted mean); unset with fewer than 2 rows
  /// or a constant response among them.
  std::optional<double> r2;
  /// Deciles by the held-out rows' predictions (boundaries from a quantile sketch of them).
  std::vector<CalibrationBin> calibration;
  /// Held-out rows a pricing run would flag: outside the ranges of the rows used, or with a
  /// leverage above the largest among them (the extrapolation flags of predict).
  std::uint64_t rows_outside_ranges = 0;
  std::uint64_t rows_high_leverage = 0;
  bool operator==(const HoldoutValidation&) const = default;
};

struct TermInclusion {
  std::string term;
  double frequency = 0;   ///< share of replicates whose final model holds the term
  bool operator==(const TermInclusion&) const = default;
};

struct SizeFrequency {
  std::size_t size = 0;         ///< terms in the final model (no intercept)
  std::size_t replicates = 0;
  bool operator==(const SizeFrequency&) const = default;
};

struct ModelFrequency {
  std::vector<std::string> terms;  ///< plan order
  double frequency = 0;
  bool chosen = false;             ///< the run's own final model
  bool operator==(const ModelFrequency&) const = default;
};

/// A coefficient's bootstrap percentile interval (the plan's confidence level).
struct CoefficientSpread {
  std::string name;                                   ///< design column name
  /// Over the replicates whose model holds the coefficient; unset when none does.
  std::optional<std::pair<double, double>> conditional;
  /// Over all replicates, 0 where the model leaves it out.
  std::pair<double, double> unconditional{0, 0};
  double inclusion = 0;          ///< share of replicates holding it
  bool operator==(const CoefficientSpread&) const = default;
};

/// Two terms that stand in for each other: rarely chosen together, often one without the other.
struct SubstitutePair {
  std::string first, second;     ///< plan order
  double together = 0;           ///< share of replicates holding both
  double first_only = 0;
  double second_only = 0;
  double statistic = 0;          ///< see README "Bootstrap stability"
  bool operator==(const SubstitutePair&) const = default;
};

struct BootstrapValidation {
  BootstrapSettings settings;
  std::vector<TermInclusion> inclusion;     ///< every candidate term, plan order
  std::vector<SizeFrequency> sizes;         ///< ascending size
  std::vector<ModelFrequency> models;       ///< the ten most frequent, most frequent first
  bool chosen_among_top = false;            ///< whether the run's model is among them
  std::vector<CoefficientSpread> coefficients;  ///< every design column of a candidate term
  std::vector<SubstitutePair> substitutes;  ///< pairs past the threshold
  bool operator==(const BootstrapValidation&) const = default;
};

struct ValidationResult {
  FoldValidation folds;
  std::optional<HoldoutValidation> holdout;
  std::optional<BootstrapValidation> bootstrap;
  bool operator==(const ValidationResult&) const = default;
};

}  // namespace stepledger
