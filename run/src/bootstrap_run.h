#pragma once
// The Poisson bootstrap of a run's selection (run/validation.h BootstrapValidation): the replicate
// factors from one read of the spill (engine/bootstrap_pass.h), the plan's selection rerun on
// each, and the summaries the audit records. Not installed.

#include <cstdint>
#include <functional>
#include <vector>

#include "stepledger/engine/bootstrap_pass.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/fit.h"
#include "stepledger/engine/spill.h"
#include "stepledger/run/validation.h"
#include "stepledger/selection/observer.h"
#include "stepledger/selection/plan.h"
#include "stepledger/selection/search.h"

namespace stepledger::run_detail {

/// Before any pass over the rows: PlanError at "bootstrap" for criterion cv (replicates x folds
/// factors are not bounded), at "bootstrap.replicates" when the replicate builders would take
/// more than kBootstrapFactorBudget for this design.
void CheckBootstrapPlan(const SearchOptions& search, const Design& design);

/// What one replicate's selection chose: its terms (plan order) and the estimate of every design
/// column (0 for columns the model leaves out or found aliased).
struct ReplicateOutcome {
  std::vector<std::size_t> terms;
  std::vector<double> coefficients;  ///< one per design column
  bool operator==(const ReplicateOutcome&) const = default;
};

/// The summaries of the replicates' outcomes (pure; tested on hand-made outcomes).
/// chosen_terms: the run's own final model; confidence_level: of the percentile intervals.
BootstrapValidation SummariseReplicates(const std::vector<ReplicateOutcome>& outcomes, const Design& design,
                                        const BootstrapSettings& settings, std::vector<std::size_t> chosen_terms,
                                        double confidence_level);

/// Runs the bootstrap: threads fold the replicate factors and run their selections; the result
/// is identical bit for bit for any thread count. observer (optional) gets progress events.
/// build_factors: BuildBootstrapFactors over the spill (or over every process's spill in a
/// shared run, run/src/shared_run.h).
using BootstrapFactorBuilder = std::function<std::vector<Factor>(const BootstrapPassOptions&)>;
BootstrapValidation RunBootstrap(const BootstrapFactorBuilder& build_factors, const Design& design,
                                 const SearchOptions& search,
                                 const FitOptions& fit_options, int threads, const SearchResult& chosen,
                                 SearchObserver* observer);

/// The substitute-pair rule (README "Bootstrap stability"): shares of replicates holding both
/// terms, only the first and only the second. statistic = 1 - together / min(share of first,
/// share of second) (1: never chosen together); a pair is listed when statistic >= 0.8 and each
/// term is chosen without the other in at least 20% of the replicates.
inline constexpr double kSubstituteStatisticThreshold = 0.8;
inline constexpr double kSubstituteAloneShare = 0.2;

}  // namespace stepledger::run_detail
