#pragma once
// Shared machinery of the search methods (not installed): the current model on the kernel,
// candidate scoring, constraints, choice with ties, and the events.

#include <cstddef>
#include <memory>
#include <optional>
#include <set>
#include <string>
#include <vector>

#include "stepledger/engine/design.h"
#include "stepledger/engine/factor.h"
#include "stepledger/engine/kernel.h"
#include "stepledger/selection/criterion.h"
#include "stepledger/selection/observer.h"
#include "stepledger/selection/plan.h"
#include "stepledger/selection/search.h"

namespace stepledger::selection_detail {

/// The most free (neither kept nor never) terms an all-subsets model may hold: every free term,
/// or what max_terms leaves beside the kept ones. One rule for the work check before the pass
/// (search.cpp) and the search's board (all_subsets.cpp).
std::size_t MostFreeTermsInModel(const SearchOptions& options, std::size_t keep_count, std::size_t free_count);

/// A scored candidate move.
struct Move {
  std::size_t term = 0;
  CandidateScore view;  ///< what observers see
  Score score;          ///< internal score of the model after the move
};

/// Text of a number for rules and reasons (6 significant digits).
/// A number in a message or rule, through the number policy (engine/number_format.h).
std::string Num(double value);
/// A plan setting (entry_p, exit_p) as the plan states it: the shortest text that reads back.
std::string Threshold(double value);

class SearchContext {
 public:
  SearchContext(const Factor& factor, const Design& design, const SearchOptions& options,
                const SearchRunOptions& run, SearchObserver& sink);

  const Design& design() const { return design_; }
  const SearchOptions& options() const { return options_; }
  const SearchRunOptions& run() const { return run_; }
  const ModelCriterion& criterion() const { return *criterion_; }
  const CriterionContext& criterion_context() const { return criterion_context_; }
  SearchObserver& sink() { return sink_; }
  ModelState& state() { return state_; }
  const ModelState& state() const { return state_; }
  const Factor& factor() const { return factor_; }

  const std::vector<std::size_t>& term_columns(std::size_t term) const { return term_columns_[term]; }
  const std::string& term_name(std::size_t term) const { return design_.terms[term].name; }
  bool is_keep(std::size_t term) const { return keep_flag_[term] != 0; }
  bool is_never(std::size_t term) const { return never_flag_[term] != 0; }
  bool in_model(std::size_t term) const { return in_model_[term] != 0; }
  /// Terms the search may move (neither keep nor never), plan order.
  const std::vector<std::size_t>& candidates() const { return candidates_; }
  /// Keep terms, in the order of the plan's keep list.
  const std::vector<std::size_t>& keep_terms() const { return keep_terms_; }
  /// Terms of the current model, model order.
  const std::vector<std::size_t>& model_terms() const { return model_terms_; }
  std::vector<std::string> ModelTermNames() const;
  /// Base columns: the intercept when the design has one.
  const std::vector<std::size_t>& base_columns() const { return base_columns_; }

  /// Coefficients of the current model.
  double k() const { return static_cast<double>(state_.model_columns().size()); }
  Score CurrentScore() const;
  std::optional<double> Reported(const Score& score) const;

  // --- starting models -------------------------------------------------------------------
  /// State := base columns + keep terms. Throws PlanError when a keep term is aliased.
  void StartFromBase();
  /// State := base + keep + every candidate that is not aliased with the earlier ones (plan
  /// order); returns the left-out terms with reasons.
  std::vector<ExcludedTerm> StartFromFull();
  /// Emits OnStart for the current state.
  void EmitStart(const std::string& rule, std::vector<ExcludedTerm> excluded);

  // --- constraints (constraints.cpp) -----------------------------------------------------
  /// Why the term may not enter the current model (hierarchy, max_terms); empty when it may.
  std::string AddBlockedReason(std::size_t term) const;
  /// Why the term may not leave the current model (keep, hierarchy); empty when it may.
  std::string RemoveBlockedReason(std::size_t term) const;
  /// Hierarchy of a term set (flags per term); kept terms are exempt (the plan asked for them).
  bool SatisfiesHierarchy(const std::vector<char>& in_set) const;
  bool AtMaxTerms() const;
  bool AboveMaxTerms() const;
  static std::string AliasReason(const Design& design, const GroupScore& score, double tolerance);

  // --- scoring and choice ----------------------------------------------------------------
  /// Scores adding every candidate term not in the model (plan order); emits OnCandidate.
  std::vector<Move> ScoreAdditions();
  /// Scores removing every model term that is not kept (plan order); emits OnCandidate.
  std::vector<Move> ScoreRemovals();
  /// A move of one term, named and sized, not yet scored: the shared start of scoring.
  Move StartMove(std::size_t term, MoveAction action) const;
  /// The shared end of scoring one move: sets its partial F, says why it may not be taken
  /// (blocked, else an undefined p-value or criterion; k_tested is the larger model's k),
  /// appends it to moves and emits OnCandidate.
  void FinishCandidate(Move move, const PartialF& partial, double k_tested, std::string blocked,
                       std::vector<Move>& moves);
  /// The best eligible move (nullptr when none), and the names of moves that tie with it.
  const Move* ChooseBest(const std::vector<Move>& moves, MoveAction action,
                         std::vector<std::string>& ties) const;
  /// Whether the chosen move is taken; rule is the reason either way.
  bool Improves(const Move& best, MoveAction action, std::string& rule) const;
  /// Summary of why nothing is eligible, e.g. "3 aliased, 2 hierarchy".
  static std::string IneligibleSummary(const std::vector<Move>& moves);

  // --- moves and events ------------------------------------------------------------------
  void Apply(const Move& move, const std::string& rule, const std::vector<std::string>& ties);
  void Stop(SearchOutcome outcome, const std::string& rule);
  /// Sorted term indices of the current model, or of it after a move (cycle guard key).
  std::vector<std::size_t> ModelKey() const;
  std::vector<std::size_t> ModelKeyAfter(const Move& move) const;

  SearchOutcome outcome() const { return outcome_; }
  const std::string& stop_rule() const { return stop_rule_; }
  std::size_t next_step_index() const { return step_index_; }

  /// all-subsets: the chosen model replaces the state; bookkeeping for the result.
  void SetModel(const std::vector<std::size_t>& terms_in_order);
  std::size_t subsets_evaluated = 0;
  std::size_t subset_tree_nodes = 0;  ///< all-subsets regression tree: nodes formed
  double subset_tolerance_used = 0;   ///< all-subsets: the tolerance the search cut with (0: exact)

 private:
  const Factor& factor_;
  const Design& design_;
  const SearchOptions& options_;
  SearchRunOptions run_;
  SearchObserver& sink_;
  CriterionContext criterion_context_;
  std::unique_ptr<ModelCriterion> criterion_;
  ModelState state_;
  std::vector<std::vector<std::size_t>> term_columns_;
  std::vector<char> keep_flag_, never_flag_, in_model_;
  std::vector<std::size_t> candidates_, keep_terms_, model_terms_, base_columns_;
  std::size_t step_index_ = 1;
  SearchOutcome outcome_ = SearchOutcome::kNotRun;
  std::string stop_rule_;
};

// Methods; each ends with ctx.Stop(...).
void RunForward(SearchContext& ctx);
void RunBackward(SearchContext& ctx);
void RunStepwise(SearchContext& ctx);
void RunAllSubsets(SearchContext& ctx);

/// One forward step (forward and stepwise): scores, chooses, and adds or stops.
/// seen (optional): models met before; a move back to one of them stops the search.
/// Returns true when a term was added.
bool ForwardStep(SearchContext& ctx, std::set<std::vector<std::size_t>>* seen);
/// One backward step; forced_by_max_terms removes the least harmful term regardless of the
/// criterion. stop_when_none: call Stop when no removal is taken (backward) or just return
/// false (stepwise's re-test). Returns true when a term was removed.
bool BackwardStep(SearchContext& ctx, std::set<std::vector<std::size_t>>* seen, bool stop_when_none);

}  // namespace stepledger::selection_detail
