// Forward selection: from the base model, add the best eligible term while that improves
// the criterion (partial-f: while the smallest entry p-value is below entry_p).

#include "search_internal.h"

namespace stepledger::selection_detail {

bool ForwardStep(SearchContext& ctx, std::set<std::vector<std::size_t>>* seen) {
  bool any_left = false;
  for (std::size_t term : ctx.candidates()) any_left = any_left || !ctx.in_model(term);
  if (!any_left) {
    ctx.Stop(SearchOutcome::kCompleted, "every candidate term is in the model");
    return false;
  }
  const std::vector<Move> moves = ctx.ScoreAdditions();
  if (ctx.AtMaxTerms()) {
    ctx.Stop(SearchOutcome::kStoppedMaxTerms,
             "max_terms " + std::to_string(*ctx.options().max_terms) + " reached");
    return false;
  }
  std::vector<std::string> ties;
  const Move* best = ctx.ChooseBest(moves, MoveAction::kAdd, ties);
  if (!best) {
    ctx.Stop(SearchOutcome::kNoEligibleTerms,
             "no term may enter (" + SearchContext::IneligibleSummary(moves) + ")");
    return false;
  }
  std::string rule;
  if (!ctx.Improves(*best, MoveAction::kAdd, rule)) {
    ctx.Stop(SearchOutcome::kStoppedNoImprovement, rule);
    return false;
  }
  if (seen) {
    const auto key = ctx.ModelKeyAfter(*best);
    if (seen->count(key)) {
      ctx.Stop(SearchOutcome::kCycleDetected,
               "cycle: adding " + best->view.term + " would return to a model met before (" + rule + ")");
      return false;
    }
    seen->insert(key);
  }
  ctx.Apply(*best, rule, ties);
  return true;
}

void RunForward(SearchContext& ctx) {
  ctx.StartFromBase();
  ctx.EmitStart("forward: start from the intercept and the kept terms", {});
  while (ForwardStep(ctx, nullptr)) {
  }
}

}  // namespace stepledger::selection_detail
