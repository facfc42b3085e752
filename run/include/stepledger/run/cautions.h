#pragma once
// The cautions of a run (DESIGN.md "Cautions the tool must show"), computed once as typed values
// that the audit, the report and the terminal render — never recomputed per command.
//
//   post-selection-inference  a selection ran: p-values, SEs and intervals ignore it
//   collinearity              the largest VIF, the VIFs above the threshold, ties in the route
//   selection-stability       bootstrap: final terms chosen in fewer than 60% of replicates, and
//                             pairs of terms that substitute for each other
//   extrapolation             the ranges over the rows used and the largest leverage
//   holdout-error             holdout: its RMSE exceeds the in-sample residual SD by more than 25%
//   association               a selected term is an association, not a cause; protected
//                             characteristics and their proxies are off limits; local law governs
//   excluded-terms            terms left out of the search or the fit, and why
//   no-residual-df            n <= k: no standard errors or tests
// Every number in a message goes through engine/number_format.h; the same numbers are kept
// unformatted in the fields beside it.

#include <cstddef>
#include <cstdint>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "stepledger/run/run_plan.h"
#include "stepledger/run/validation.h"

namespace stepledger {

enum class CautionKind {
  kPostSelectionInference,
  kCollinearity,
  kSelectionStability,
  kExtrapolation,
  kHoldoutError,
  kAssociation,
  kExcludedTerms,
  kNoResidualDf,
};
/// "post-selection-inference", "collinearity", ... (the audit's `kind`).
std::string_view ToString(CautionKind kind);

/// A final-model term below this bootstrap inclusion frequency is named by the
/// selection-stability caution (the validation issue's threshold; common practice).
inline constexpr double kStableInclusionShare = 0.6;
/// A holdout RMSE above this multiple of the in-sample residual SD is named by the holdout-error
/// caution: 25% worse than the fit suggests (common practice, no published source).
inline constexpr double kHoldoutErrorRatio = 1.25;

/// A column range quoted by the extrapolation caution.
struct QuotedRange {
  std::string column;
  double min = 0;
  double max = 0;
  /// True: over the rows used (from the diagnostics pass); false: over every row read (the
  /// profile), which can only be wider.
  bool over_rows_used = false;
};

/// One caution: its kind, its message for people, and the figures it quotes. Each field below
/// the message is filled only by the kinds named beside it.
struct Caution {
  CautionKind kind = CautionKind::kAssociation;
  std::string message;
  std::optional<std::size_t> candidate_terms;  ///< post-selection-inference
  std::string largest_vif_column;              ///< collinearity (empty: no VIF defined)
  std::optional<double> largest_vif;           ///< collinearity
  std::optional<double> vif_threshold;         ///< collinearity
  std::vector<std::string> ties;               ///< collinearity: "step 3: age tied with cpu"
  std::vector<QuotedRange> ranges;             ///< extrapolation
  std::optional<double> max_leverage;          ///< extrapolation
  std::vector<std::string> terms;              ///< excluded-terms: "term: reason"
  std::vector<TermInclusion> rarely_chosen;    ///< selection-stability: final terms below the share
  std::vector<SubstitutePair> substitutes;     ///< selection-stability: the bootstrap's pairs
  std::optional<std::size_t> replicates;       ///< selection-stability
  std::optional<double> holdout_rmse;          ///< holdout-error
  std::optional<double> residual_sd;           ///< holdout-error: the in-sample sigma
  std::optional<std::uint64_t> holdout_rows;   ///< holdout-error
};

/// The cautions that apply to a run, in the order above.
std::vector<Caution> ComputeCautions(const RunResult& run);

}  // namespace stepledger
