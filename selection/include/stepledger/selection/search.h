#pragma once
// The one entry point of every selection method.
//
// RunSearch works on the factor alone (engine/kernel.h): after the data pass, its cost does
// not depend on the number of rows. Per step, scoring every candidate is O(m^2) for
// one-column terms and O(m d^2) for a term of d columns; a move is O(m^2) Givens rotations.
//
// Methods (SearchOptions::method):
//  - forward: from the base model (intercept + keep terms) add the best eligible term while
//    the criterion improves (partial-f: while the smallest entry p-value < entry_p);
//  - backward: from every eligible term remove the worst while the criterion improves
//    (partial-f: while the largest exit p-value > exit_p); while the model has more than
//    max_terms terms, the least harmful removal is forced;
//  - stepwise: a forward step, then every term of the model is re-tested for removal
//    (repeatedly) before the next forward step; a move back to a model seen before ends the
//    search (kCycleDetected); partial-f with entry_p > exit_p is refused (it can cycle);
//  - all-subsets: the best_per_size models of every size by RSS, by branch and bound over
//    a regression tree of triangular factors with preordering (a subtree is bounded by the RSS
//    of the largest model in it, Furnival and Wilson, Technometrics 1974; the tree of Gatu and
//    Kontoghiorghes, JCGS 2006; subset_tree.cpp), then the best of those by the criterion; with cv, too, the
//    models kept are those best by RSS (exact), and cv chooses among them only: cv does not
//    fall with RSS, so no bound prunes by it, and the model of least cv over every subset is
//    not searched for;
//  - none: the base model plus every eligible term.
// Constraints (all methods): keep terms are in every model; never terms in none; with
// hierarchy a product or power enters only when its parts are in the model and a part leaves
// only when nothing built on it is left (all-subsets: subsets that break hierarchy are
// dropped); at most max_terms terms; a term aliased with the model is not eligible (the
// candidate says which column and its relative norm against the tolerance). Ties (scores
// equal within kTieRelativeTolerance) break by plan order and are recorded in the step.
// partial-f ranks candidates by p-value, then by F (p-values of strong terms underflow to 0).

#include <cstdint>
#include <iosfwd>
#include <string>
#include <vector>

#include "stepledger/engine/cross_validation.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/factor.h"
#include "stepledger/engine/kernel.h"
#include "stepledger/selection/observer.h"
#include "stepledger/selection/plan.h"

namespace stepledger {

/// The result of a search: a value type, starting at "not run".
struct SearchResult {
  SearchOutcome outcome = SearchOutcome::kNotRun;
  Method method = Method::kStepwise;
  Criterion criterion = Criterion::kBic;
  std::vector<RouteStep> steps;          ///< start, moves, stop
  std::vector<SubsetRecord> subsets;     ///< all-subsets only: by size, then RSS
  std::vector<ExcludedTerm> excluded;    ///< terms left out before the search, and why
  std::vector<std::string> final_terms;  ///< model order, no intercept
  std::vector<std::size_t> final_term_indices;
  std::optional<double> final_criterion_value;  ///< reported units
  double final_rss = 0;
  std::string stop_rule;
  double n = 0;                          ///< rows used
  double tss = 0;
  std::optional<double> cp_sigma2;       ///< sigma^2 of the largest eligible model
  std::size_t subsets_evaluated = 0;     ///< all-subsets: models whose RSS was computed
  std::size_t subset_nodes = 0;          ///< all-subsets regression tree: nodes whose factor was formed
  /// all-subsets: the relative tolerance the search used (SearchOptions::subset_tolerance); 0 when
  /// the kept models are exactly the best of their sizes. The other methods: 0.
  double subset_tolerance = 0;

  bool IsModelUsable() const { return outcome != SearchOutcome::kNotRun; }
  /// all-subsets: what the kept models are, in words: "exact: ..." or, with a tolerance, the
  /// bound each listed model meets (README "All subsets"). Empty for the other methods.
  std::string SubsetGuarantee() const;
  /// A few lines: method, criterion, outcome, final terms.
  std::string BriefReport() const;
  /// The route table (step, action, term, criterion before -> after, rule), ties, exclusions,
  /// and for all-subsets the subsets kept.
  std::string FullReport() const;
};

/// Extra switches of the search that are not part of a plan.
struct SearchRunOptions {
  KernelOptions kernel;
  /// all-subsets: enumerate every subset in Gray-code order instead of branch and bound
  /// (one term moved per subset; for cross-checks; refused above 30 candidate terms).
  bool exhaustive_subsets = false;
  /// all-subsets: the earlier branch and bound over a single "drop" tree (one model per node,
  /// a kernel move and a removal score per remaining term); kept for the benchmark beside the
  /// regression tree, which is the default. Ignored when exhaustive_subsets is set.
  bool drop_tree_subsets = false;
  /// all-subsets: threads that share the subtrees of the regression tree (>= 1). The kept
  /// models are the same bits for any count (see all_subsets.cpp).
  int threads = 1;
  /// all-subsets: seconds between the observer's OnSubsetProgress events (the first after this
  /// long). Default 0.5; the command line's progress line shows them only on a terminal.
  double progress_seconds = 0.5;
  /// Lets stepwise partial-f run with entry_p > exit_p, which ValidateSearchOptions refuses,
  /// so that tests can exercise the cycle guard. Never set by the command line.
  bool allow_cycling_thresholds = false;
  /// Criterion cv: the per-fold factors of the pass (not owned; must outlive RunSearch), of the
  /// same design as the factor. Ignored by the other criteria. Criterion cv without it: RunSearch
  /// throws PlanError at "criterion".
  const CrossValidation* cross_validation = nullptr;
};

/// The one validation of a plan's search settings, wherever the plan comes from (a plan file,
/// the command line, a recorded audit). Throws PlanError naming the key ("entry_p", "exit_p",
/// "max_terms", "best_per_size", "folds" (2..100), "holdout.fraction" (strictly between 0 and 1),
/// "bootstrap.replicates" (1..100000), "criterion", "keep[1]", "never[0]") for values out of
/// range, entry_p > exit_p where the thresholds decide the route (stepwise by partial F: a term
/// could enter and leave in turn; other criteria do not use the thresholds), more keep terms than
/// max_terms, a term listed twice or both kept and never.
void ValidateSearchSettings(const SearchOptions& options, bool allow_cycling_thresholds = false);

/// How much an all-subsets search may have to read, as log2 of the count of subsets of the
/// candidate terms (neither kept nor never) with at most max_terms terms: log2 of the sum of
/// C(m, s) for s = 0 .. max free terms (m when max_terms is unset: log2 2^m = m). The regression
/// tree (selection/src/subset_tree.cpp) reads each of them at most once, and cuts most of them on
/// the data seen so far; how many depends on the data far more than on m.
double AllSubsetsWorstCaseLog2(std::size_t candidates, std::size_t max_free_terms);

/// The largest worst case an exact all-subsets search takes: 2^50 subsets, the 50 candidate terms
/// of the largest measured case (README "All subsets"; bench/select_bench, 2,000 rows, best 3 per
/// size: 0.4 s at m = 50 with correlated terms of mixed strength, 6.7 s at m = 44 when every term
/// has a similar small effect). A larger plan is refused before any pass over the rows; max_terms
/// lowers its count, and so does moving terms to keep or never.
inline constexpr double kMaxAllSubsetsLog2 = 50;
/// The same with a subset_tolerance above 0, which cuts far more: 2^55 (bench/select_bench's
/// tolerance table: correlated terms, m = 55, 1.0 s with a tolerance of 0.01 and about 2 minutes
/// with 0.001 on a busy machine; every term of a similar small effect, m = 48, 52 s with 0.01).
inline constexpr double kMaxAllSubsetsLog2WithTolerance = 55;
/// The most memory of triangles the regression tree may hold per thread: one triangle of the free
/// terms' design columns (and y) at each depth of its path, (m + 1) q^2 doubles. 512 MiB: about
/// 400 one-column candidate terms (with max_terms; without, kMaxAllSubsetsLog2 refuses far fewer).
inline constexpr std::uint64_t kMaxAllSubsetsTreeBytes = std::uint64_t{512} << 20;

/// ValidateSearchSettings, then the checks that need the design: keep and never name terms of
/// the design (a plan with "terms": "all" can only be checked here), and all-subsets's worst case
/// is within kMaxAllSubsetsLog2 (kMaxAllSubsetsLog2WithTolerance with a subset_tolerance): else a
/// PlanError at "method", before any pass over the rows, that says how to go on (the max_terms
/// that would do, a tolerance, stepwise or forward, keep and never).
void ValidateSearchOptions(const SearchOptions& options, const Design& design,
                           bool allow_cycling_thresholds = false);

/// Runs the search. The observer (optional) sees every event as it happens; the result holds
/// the same route. Throws PlanError for invalid options (see ValidateSearchOptions) and for a
/// keep term aliased with the intercept and earlier keep terms, and for criterion cv without
/// run.cross_validation; std::logic_error when the factor or the fold factors are of another
/// design, or (cv) the number of fold factors is not the plan's folds.
SearchResult RunSearch(const Factor& factor, const Design& design, const SearchOptions& options,
                       SearchObserver* observer = nullptr, const SearchRunOptions& run = {});

}  // namespace stepledger
