// Backward elimination: from every eligible term, remove the worst while that improves the
// criterion (partial-f: while the largest exit p-value is above exit_p). While the model has
// more than max_terms terms, the least harmful removal is forced.

#include "search_internal.h"

namespace stepledger::selection_detail {

bool BackwardStep(SearchContext& ctx, std::set<std::vector<std::size_t>>* seen,
                  bool stop_when_none) {
  bool any_removable = false;
  for (std::size_t term : ctx.model_terms()) any_removable = any_removable || !ctx.is_keep(term);
  if (!any_removable) {
    if (stop_when_none) ctx.Stop(SearchOutcome::kCompleted, "no removable term is left in the model");
    return false;
  }
  const std::vector<Move> moves = ctx.ScoreRemovals();
  std::vector<std::string> ties;
  const Move* best = ctx.ChooseBest(moves, MoveAction::kRemove, ties);
  if (!best) {
    if (stop_when_none) {
      ctx.Stop(SearchOutcome::kNoEligibleTerms,
               "no term may leave (" + SearchContext::IneligibleSummary(moves) + ")");
    }
    return false;
  }
  std::string rule;
  const bool improves = ctx.Improves(*best, MoveAction::kRemove, rule);
  if (ctx.AboveMaxTerms()) {
    rule = std::to_string(ctx.model_terms().size()) + " terms > max_terms " +
           std::to_string(*ctx.options().max_terms) + ": the least harmful removal is forced (" + rule + ")";
  } else if (!improves) {
    if (stop_when_none) ctx.Stop(SearchOutcome::kStoppedNoImprovement, rule);
    return false;
  }
  if (seen) {
    const auto key = ctx.ModelKeyAfter(*best);
    if (seen->count(key)) {
      ctx.Stop(SearchOutcome::kCycleDetected,
               "cycle: removing " + best->view.term + " would return to a model met before (" + rule + ")");
      return false;
    }
    seen->insert(key);
  }
  ctx.Apply(*best, rule, ties);
  return true;
}

void RunBackward(SearchContext& ctx) {
  auto excluded = ctx.StartFromFull();
  ctx.EmitStart("backward: start from every eligible term", std::move(excluded));
  while (BackwardStep(ctx, nullptr, true)) {
  }
}

}  // namespace stepledger::selection_detail
