// All subsets: the best_per_size models of every size by RSS, then the best of those by the
// criterion.
//
// Branch and bound over the factor, in the spirit of Furnival and Wilson ("Regressions by
// leaps and bounds", Technometrics 16, 1974): RSS never falls when a term leaves, so the RSS
// of the largest model of a subtree bounds every model in it; a subtree is skipped when, at
// every size it contains, the bound is already worse than the best_per_size-th model kept.
// The tree is the "drop" tree: a node is a model M with an ordered list D of terms that may
// still leave; child i drops D[i] and may drop only D[i+1..]. Children are ordered by the RSS
// of the child model, largest first, so the large subtrees that lack an important term are
// the ones bounded away. Each node costs one kernel move and one ScoreRemove per term of D.
//
// The exhaustive cross-check visits every subset in Gray-code order: one term enters or
// leaves per subset (ModelState Add/Remove), 2^m moves.
//
// Criterion cv: the kept models are still the best by RSS (the bound is exact for RSS, and
// cv, which does not fall with RSS, admits no such bound); cv then ranks the kept models and
// chooses among them only. So the choice is the best cv among the best_per_size models of
// every size by RSS, not the best cv over all subsets; the rule and the README say so.
//
// Hierarchy: subsets that break it are not kept (the bound stays valid: it only uses kept
// models). Terms aliased with the plan-order earlier terms are left out of every subset.
// Sizes count terms, keep terms included; max_terms caps the size.

#include <algorithm>
#include <bit>
#include <cstdint>

#include "search_internal.h"
#include "subset_tree.h"
#include "stepledger/engine/errors.h"

namespace stepledger::selection_detail {
namespace {

using Entry = SubsetEntry;

class SubsetSearch {
 public:
  SubsetSearch(SearchContext& ctx, std::vector<std::size_t> free_terms, SubsetBoard& board)
      : ctx_(ctx), free_(std::move(free_terms)),
        max_free_(MaxFree(ctx, free_.size())),
        board_(board),
        in_set_(ctx.design().terms.size(), 0) {
    for (std::size_t term : ctx.keep_terms()) in_set_[term] = 1;
  }

  static std::size_t MaxFree(const SearchContext& ctx, std::size_t free_count) {
    return MostFreeTermsInModel(ctx.options(), ctx.keep_terms().size(), free_count);
  }

  /// Branch and bound; the state must hold base + keep + every free term.
  void BranchAndBound() {
    for (std::size_t term : free_) in_set_[term] = 1;
    std::vector<std::size_t> removable(free_.size());
    for (std::size_t position = 0; position < free_.size(); ++position) removable[position] = position;
    Visit(removable, free_.size());
  }

  /// Every subset in Gray-code order; the state must hold base + keep only.
  void Exhaustive() {
    const std::size_t m = free_.size();
    if (m > 30) {
      throw InputError("exhaustive all-subsets enumeration is limited to 30 candidate terms (got " +
                       std::to_string(m) + "); use the branch and bound");
    }
    std::uint64_t mask = 0;
    std::size_t count_in = 0;
    Record(count_in);
    const std::uint64_t total = std::uint64_t{1} << m;
    for (std::uint64_t code = 1; code < total; ++code) {
      const std::size_t position = static_cast<std::size_t>(std::countr_zero(code));
      const std::size_t term = free_[position];
      const std::uint64_t bit = std::uint64_t{1} << position;
      if (mask & bit) {
        ctx_.state().Remove(ctx_.term_columns(term));
        in_set_[term] = 0;
        --count_in;
      } else {
        if (!ctx_.state().Add(ctx_.term_columns(term))) {
          throw NumericalError("all-subsets: term '" + ctx_.term_name(term) +
                               "' became aliased within a subset of a non-aliased set");
        }
        in_set_[term] = 1;
        ++count_in;
      }
      mask ^= bit;
      Record(count_in);
    }
  }

  std::size_t evaluated() const { return evaluated_; }

 private:
  void Record(std::size_t count_in) {
    ++evaluated_;
    if (count_in > max_free_) return;
    if (!ctx_.SatisfiesHierarchy(in_set_)) return;
    const double rss = ctx_.state().Rss();
    if (!board_.Admits(count_in, rss)) return;
    std::vector<std::size_t> terms;
    for (std::size_t term = 0; term < in_set_.size(); ++term) {
      if (in_set_[term]) terms.push_back(term);
    }
    board_.Offer(count_in, rss, std::move(terms));
  }

  void Visit(const std::vector<std::size_t>& removable, std::size_t count_in) {
    Record(count_in);
    if (removable.empty()) return;
    std::vector<std::pair<double, std::size_t>> children;
    children.reserve(removable.size());
    for (std::size_t position : removable) {
      const GroupScore score = ctx_.state().ScoreRemove(ctx_.term_columns(free_[position]));
      children.emplace_back(score.rss, position);
    }
    // Largest child RSS first (the most important term leaves first); plan order on ties.
    std::stable_sort(children.begin(), children.end(),
                     [](const auto& a, const auto& b) { return a.first > b.first; });
    for (std::size_t child = 0; child < children.size(); ++child) {
      const auto [bound, position] = children[child];
      const std::size_t later = children.size() - child - 1;
      const auto hi = static_cast<std::ptrdiff_t>(count_in) - 1;
      const auto lo = hi - static_cast<std::ptrdiff_t>(later);
      if (board_.CanPrune(bound, lo, hi)) continue;
      std::vector<std::size_t> next;
      next.reserve(later);
      for (std::size_t other = child + 1; other < children.size(); ++other) next.push_back(children[other].second);
      const std::size_t term = free_[position];
      ctx_.state().Remove(ctx_.term_columns(term));
      in_set_[term] = 0;
      Visit(next, count_in - 1);
      if (!ctx_.state().Add(ctx_.term_columns(term))) {
        throw NumericalError("all-subsets: term '" + ctx_.term_name(term) + "' could not be restored");
      }
      in_set_[term] = 1;
    }
  }

  SearchContext& ctx_;
  std::vector<std::size_t> free_;
  std::size_t max_free_;
  SubsetBoard& board_;
  std::vector<char> in_set_;
  std::size_t evaluated_ = 0;
};

}  // namespace

void RunAllSubsets(SearchContext& ctx) {
  auto excluded = ctx.StartFromFull();
  std::vector<std::size_t> free_terms;
  for (std::size_t term : ctx.model_terms()) {
    if (!ctx.is_keep(term)) free_terms.push_back(term);
  }
  std::sort(free_terms.begin(), free_terms.end());
  const std::size_t max_free = SubsetSearch::MaxFree(ctx, free_terms.size());
  SubsetBoard board(max_free + 1, ctx.options().best_per_size);
  SubsetSearch search(ctx, free_terms, board);
  if (ctx.run().exhaustive_subsets) {
    ctx.StartFromBase();
    ctx.EmitStart("all-subsets (exhaustive, Gray-code order): every subset of the candidate terms",
                  std::move(excluded));
    search.Exhaustive();
    ctx.subsets_evaluated = search.evaluated();
  } else if (ctx.run().drop_tree_subsets) {
    ctx.StartFromBase();
    ctx.EmitStart("all-subsets (branch and bound): the best " +
                      std::to_string(ctx.options().best_per_size) + " models of every size by RSS",
                  std::move(excluded));
    std::vector<std::size_t> full = ctx.keep_terms();
    full.insert(full.end(), free_terms.begin(), free_terms.end());
    ctx.SetModel(full);
    search.BranchAndBound();
    ctx.subsets_evaluated = search.evaluated();
  } else {
    ctx.StartFromBase();
    const double tolerance = ctx.options().subset_tolerance;
    ctx.EmitStart("all-subsets (branch and bound): the best " + std::to_string(ctx.options().best_per_size) +
                      " models of every size by RSS" +
                      (tolerance > 0 ? ", each within a relative tolerance of " + Threshold(tolerance) +
                                           " of the best model of its rank"
                                     : std::string()),
                  std::move(excluded));
    ctx.subset_tolerance_used = tolerance;
    const SubsetTreeStats stats = RunSubsetTree(ctx, free_terms, max_free, board);
    ctx.subsets_evaluated = static_cast<std::size_t>(stats.models_evaluated);
    ctx.subset_tree_nodes = static_cast<std::size_t>(stats.nodes);
  }

  // Score the kept models and choose the best by the criterion (ties: smaller size, then
  // smaller RSS, then plan order: the order of the list).
  std::vector<SubsetRecord> records;
  std::vector<Score> scores;
  const auto& boards = board.boards();
  const std::size_t base_width = ctx.base_columns().size();
  for (std::size_t size = 0; size < boards.size(); ++size) {
    std::size_t rank = 1;
    for (const Entry& entry : boards[size]) {
      SubsetRecord record;
      record.size = size + ctx.keep_terms().size();
      record.term_indices = entry.terms;
      for (std::size_t term : entry.terms) record.terms.push_back(ctx.term_name(term));
      record.rss = entry.rss;
      std::vector<std::size_t> columns = ctx.base_columns();
      for (std::size_t term : entry.terms) {
        const auto& term_columns = ctx.term_columns(term);
        columns.insert(columns.end(), term_columns.begin(), term_columns.end());
      }
      (void)base_width;
      const Score score = ctx.criterion().ScoreModel({columns, entry.rss, static_cast<double>(columns.size())});
      if (score.value) record.score = ctx.criterion().Reported(*score.value);
      record.fold_sse = score.fold_sse;
      record.rank_in_size = rank++;
      records.push_back(std::move(record));
      scores.push_back(score);
    }
  }
  ctx.sink().OnSubsets(records);

  std::optional<std::size_t> best;
  for (std::size_t index = 0; index < records.size(); ++index) {
    if (!scores[index].value) continue;
    if (!best || (*scores[index].value < *scores[*best].value &&
                  !ScoresTie(*scores[index].value, *scores[*best].value))) {
      best = index;
    }
  }
  if (!best) {
    ctx.Stop(SearchOutcome::kNoEligibleTerms,
             "no kept subset has a defined " + ctx.criterion().ValueName() +
                 (scores.empty() ? std::string() : " (" + scores.front().undefined_reason + ")"));
    return;
  }
  std::vector<std::size_t> chosen = ctx.keep_terms();
  for (std::size_t term : records[*best].term_indices) {
    if (!ctx.is_keep(term)) chosen.push_back(term);
  }
  ctx.SetModel(chosen);
  std::string names;
  for (const auto& name : records[*best].terms) names += (names.empty() ? "" : ", ") + name;
  if (names.empty()) names = "no terms";
  ctx.Stop(SearchOutcome::kCompleted,
           "best of " + std::to_string(records.size()) + " kept subsets" +
               (ctx.options().criterion == Criterion::kCv ? " (the best by RSS of each size)" : "") + " by " +
               ctx.criterion().ValueName() + ": " + names + " (" + ctx.criterion().ValueName() +
               " " + FormatCriterionValue(ctx.options().criterion, records[*best].score) + ")");
}

}  // namespace stepledger::selection_detail
