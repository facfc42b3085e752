// Stepwise: a forward step, then every term of the model re-tested for removal (repeatedly)
// before the next forward step. A move back to a model met before ends the search: with
// strict improvement of a criterion that cannot happen, but partial-f thresholds can cycle.

#include "search_internal.h"

namespace stepledger::selection_detail {

void RunStepwise(SearchContext& ctx) {
  ctx.StartFromBase();
  ctx.EmitStart("stepwise: start from the intercept and the kept terms", {});
  std::set<std::vector<std::size_t>> seen{ctx.ModelKey()};
  while (ForwardStep(ctx, &seen)) {
    while (BackwardStep(ctx, &seen, false)) {
    }
    if (ctx.outcome() != SearchOutcome::kNotRun) return;  // a cycle ended it
  }
}

}  // namespace stepledger::selection_detail
