#include <algorithm>
#include <cmath>
#include <sstream>

#include "stepledger/engine/number_format.h"
#include "search_internal.h"
#include "stepledger/engine/errors.h"

namespace stepledger::selection_detail {

std::string Num(double value) { return FormatQuantity(value, 6); }

std::size_t MostFreeTermsInModel(const SearchOptions& options, std::size_t keep_count, std::size_t free_count) {
  if (!options.max_terms) return free_count;
  return std::min(free_count, *options.max_terms - std::min(keep_count, *options.max_terms));
}

std::string Threshold(double value) {
  // A plan setting as the plan states it (0.05, not 0.05000): the shortest text that reads back
  // (17 significant digits always do).
  std::ostringstream text;
  for (int digits = 1;; ++digits) {
    text.str("");
    text.precision(digits);
    text << value;
    if (digits == 17 || std::stod(text.str()) == value) return text.str();
  }
}

namespace {

std::vector<std::size_t> IndicesOf(const Design& design, const std::vector<std::string>& names) {
  std::vector<std::size_t> indices;
  for (const auto& name : names) indices.push_back(design.FindTerm(name));
  return indices;
}

}  // namespace

SearchContext::SearchContext(const Factor& factor, const Design& design,
                             const SearchOptions& options, const SearchRunOptions& run,
                             SearchObserver& sink)
    : factor_(factor), design_(design), options_(options), run_(run), sink_(sink),
      state_(factor, run.kernel) {
  const std::size_t term_count = design.terms.size();
  term_columns_.reserve(term_count);
  for (std::size_t term = 0; term < term_count; ++term) term_columns_.push_back(design.TermColumns(term));
  keep_flag_.assign(term_count, 0);
  never_flag_.assign(term_count, 0);
  in_model_.assign(term_count, 0);
  keep_terms_ = IndicesOf(design, options.keep);
  for (std::size_t term : keep_terms_) keep_flag_[term] = 1;
  for (std::size_t term : IndicesOf(design, options.never)) never_flag_[term] = 1;
  for (std::size_t term = 0; term < term_count; ++term) {
    if (!keep_flag_[term] && !never_flag_[term]) candidates_.push_back(term);
  }
  if (design.intercept) base_columns_.push_back(0);

  criterion_context_.n = static_cast<double>(factor.rows);
  criterion_context_.intercept = design.intercept;
  criterion_context_.log_weight_sum = factor.log_weight_sum;
  {
    ModelState probe(factor, run.kernel);
    if (design.intercept) {
      probe.Add(base_columns_);
      criterion_context_.tss = probe.Rss();
    } else {
      criterion_context_.tss = probe.TotalSumOfSquaresAboutZero();
    }
    // sigma^2 of the largest eligible model (Cp): base, keep, then every candidate that is
    // not aliased with the earlier ones.
    for (std::size_t term : keep_terms_) probe.Add(term_columns_[term]);
    for (std::size_t term : candidates_) probe.Add(term_columns_[term]);
    const double k_full = static_cast<double>(probe.model_columns().size());
    const double rss_full = probe.Rss();
    if (criterion_context_.n > k_full && rss_full > 0) {
      criterion_context_.full_sigma2 = rss_full / (criterion_context_.n - k_full);
    }
  }
  criterion_context_.cross_validation = run.cross_validation;
  if (options.criterion == Criterion::kCv) {
    for (const auto& column : design.columns) criterion_context_.column_names.push_back(column.name);
  }
  criterion_ = MakeCriterion(options.criterion, criterion_context_);
}

std::vector<std::string> SearchContext::ModelTermNames() const {
  std::vector<std::string> names;
  for (std::size_t term : model_terms_) names.push_back(term_name(term));
  return names;
}

Score SearchContext::CurrentScore() const {
  const auto& columns = state_.model_columns();
  return criterion_->ScoreModel({columns, state_.Rss(), k()});
}

std::optional<double> SearchContext::Reported(const Score& score) const {
  if (!score.value) return std::nullopt;
  return criterion_->Reported(*score.value);
}

void SearchContext::StartFromBase() {
  if (!state_.model_columns().empty()) state_ = ModelState(factor_, run_.kernel);
  std::fill(in_model_.begin(), in_model_.end(), 0);
  model_terms_.clear();
  if (!base_columns_.empty()) state_.Add(base_columns_);
  for (std::size_t position = 0; position < keep_terms_.size(); ++position) {
    const std::size_t term = keep_terms_[position];
    const GroupScore probe = state_.ScoreAdd(term_columns_[term]);
    if (probe.aliased || !state_.Add(term_columns_[term])) {
      throw PlanError("keep[" + std::to_string(position) + "]",
                      "kept term '" + term_name(term) + "' is aliased with the intercept and the "
                      "earlier kept terms (" + AliasReason(design_, probe, run_.kernel.alias_tolerance) +
                      "); drop it from keep");
    }
    in_model_[term] = 1;
    model_terms_.push_back(term);
  }
}

std::vector<ExcludedTerm> SearchContext::StartFromFull() {
  StartFromBase();
  std::vector<ExcludedTerm> excluded;
  for (std::size_t term : candidates_) {
    const GroupScore probe = state_.ScoreAdd(term_columns_[term]);
    if (probe.aliased || !state_.Add(term_columns_[term])) {
      excluded.push_back({term_name(term), "aliased with the terms before it in the plan: " +
                                               AliasReason(design_, probe, run_.kernel.alias_tolerance)});
      continue;
    }
    in_model_[term] = 1;
    model_terms_.push_back(term);
  }
  return excluded;
}

void SearchContext::EmitStart(const std::string& rule, std::vector<ExcludedTerm> excluded) {
  StartEvent event;
  event.method = options_.method;
  event.criterion = options_.criterion;
  event.model_terms = ModelTermNames();
  for (std::size_t term : candidates_) event.candidate_terms.push_back(term_name(term));
  std::vector<ExcludedTerm> all;
  for (std::size_t term = 0; term < design_.terms.size(); ++term) {
    if (never_flag_[term]) all.push_back({term_name(term), "never: the plan excludes it"});
  }
  for (auto& item : excluded) all.push_back(std::move(item));
  event.excluded = std::move(all);
  event.n = criterion_context_.n;
  event.k = state_.model_columns().size();
  event.rss = state_.Rss();
  event.criterion_value = Reported(CurrentScore());
  event.rule = rule;
  sink_.OnStart(event);
}

std::vector<Move> SearchContext::ScoreAdditions() {
  std::vector<Move> moves;
  bool any_single = false;
  for (std::size_t term : candidates_) {
    if (!in_model_[term] && term_columns_[term].size() == 1) any_single = true;
  }
  std::vector<std::optional<GroupScore>> single_scores;
  if (any_single) single_scores = state_.ScoreAllSingleAdds();
  const double n = criterion_context_.n;
  std::vector<std::size_t> columns_after = state_.model_columns();
  const std::size_t model_width = columns_after.size();
  for (std::size_t term : candidates_) {
    if (in_model_[term]) continue;
    const auto& columns = term_columns_[term];
    Move move = StartMove(term, MoveAction::kAdd);
    CandidateScore& view = move.view;
    std::optional<double> rss_after;
    double rss_drop = 0;
    std::string alias_reason;
    if (columns.size() == 1 && single_scores[columns[0]]) {
      rss_after = single_scores[columns[0]]->rss;
      rss_drop = single_scores[columns[0]]->rss_change;
    } else {
      const GroupScore group = state_.ScoreAdd(columns);
      if (group.aliased) alias_reason = AliasReason(design_, group, run_.kernel.alias_tolerance);
      else rss_after = group.rss;
      rss_drop = group.rss_change;
    }
    if (!rss_after) {
      FinishCandidate(std::move(move), PartialF{}, 0, "aliased: " + alias_reason, moves);
      continue;
    }
    view.rss = rss_after;
    const double k_after = static_cast<double>(model_width + columns.size());
    columns_after.resize(model_width);
    columns_after.insert(columns_after.end(), columns.begin(), columns.end());
    move.score = criterion_->ScoreModel({columns_after, *rss_after, k_after});
    view.score = Reported(move.score);
    view.fold_sse = move.score.fold_sse;
    const PartialF partial =
        ComputePartialFFromChange(rss_drop, *rss_after, static_cast<double>(columns.size()), n, k_after);
    FinishCandidate(std::move(move), partial, k_after, AddBlockedReason(term), moves);
  }
  return moves;
}

std::vector<Move> SearchContext::ScoreRemovals() {
  std::vector<Move> moves;
  const double rss_now = state_.Rss();
  const double n = criterion_context_.n;
  const double k_now = k();
  std::vector<std::size_t> model_in_plan_order = model_terms_;
  std::sort(model_in_plan_order.begin(), model_in_plan_order.end());
  for (std::size_t term : model_in_plan_order) {
    if (keep_flag_[term]) continue;
    const auto& columns = term_columns_[term];
    Move move = StartMove(term, MoveAction::kRemove);
    CandidateScore& view = move.view;
    const GroupScore group = state_.ScoreRemove(columns);
    view.rss = group.rss;
    const double k_after = k_now - static_cast<double>(columns.size());
    std::vector<std::size_t> columns_after;
    for (std::size_t column : state_.model_columns()) {
      if (std::find(columns.begin(), columns.end(), column) == columns.end()) columns_after.push_back(column);
    }
    move.score = criterion_->ScoreModel({columns_after, group.rss, k_after});
    view.score = Reported(move.score);
    view.fold_sse = move.score.fold_sse;
    const PartialF partial =
        ComputePartialFFromChange(group.rss_change, rss_now, static_cast<double>(columns.size()), n, k_now);
    FinishCandidate(std::move(move), partial, k_now, RemoveBlockedReason(term), moves);
  }
  return moves;
}

Move SearchContext::StartMove(std::size_t term, MoveAction action) const {
  Move move;
  move.term = term;
  move.view.term = term_name(term);
  move.view.term_index = term;
  move.view.action = action;
  move.view.df = term_columns_[term].size();
  return move;
}

void SearchContext::FinishCandidate(Move move, const PartialF& partial, double k_tested,
                                    std::string blocked, std::vector<Move>& moves) {
  const bool adding = move.view.action == MoveAction::kAdd;
  move.view.f = partial.f;
  move.view.p = partial.p;
  if (blocked.empty()) {
    if (criterion_->is_p_value_rule()) {
      if (!partial.p) {
        const double n = criterion_context_.n;
        blocked = std::string(adding ? "entry" : "exit") + " p-value undefined: " +
                  (n <= k_tested ? std::string(adding ? "n <= k after adding" : "n <= k") + " (n = " +
                                       FormatCount(static_cast<std::int64_t>(n)) + ", k = " +
                                       FormatCount(static_cast<std::int64_t>(k_tested)) + ")"
                                 : std::string("exact fit"));
      }
    } else if (!move.score.defined()) {
      blocked = std::string("criterion undefined after ") + (adding ? "adding" : "removing") + ": " +
                move.score.undefined_reason;
    }
  }
  move.view.eligible = blocked.empty();
  move.view.reason = std::move(blocked);
  moves.push_back(std::move(move));
  sink_.OnCandidate(moves.back().view);
}

namespace {

/// Ranking keys, smaller is better: criterion (score); partial-f adding (p, -F); partial-f
/// removing (-p, F). F breaks ties of p because p-values of strong terms underflow to 0.
std::pair<double, double> RankKey(const Move& move, bool p_rule, MoveAction action) {
  if (!p_rule) return {*move.score.value, 0.0};
  const double p = *move.view.p;
  const double f = move.view.f.value_or(0.0);
  return action == MoveAction::kAdd ? std::make_pair(p, -f) : std::make_pair(-p, f);
}

}  // namespace

const Move* SearchContext::ChooseBest(const std::vector<Move>& moves, MoveAction action,
                                      std::vector<std::string>& ties) const {
  ties.clear();
  const bool p_rule = criterion_->is_p_value_rule();
  const Move* best = nullptr;
  std::pair<double, double> best_key;
  // Moves are in plan order, so the first of equal keys wins: ties break by plan order.
  for (const Move& move : moves) {
    if (!move.view.eligible) continue;
    const auto key = RankKey(move, p_rule, action);
    if (!best) { best = &move; best_key = key; continue; }
    const bool first_tie = ScoresTie(key.first, best_key.first);
    if (!first_tie && key.first < best_key.first) { best = &move; best_key = key; continue; }
    if (first_tie && !ScoresTie(key.second, best_key.second) && key.second < best_key.second) {
      best = &move; best_key = key;
    }
  }
  if (!best) return nullptr;
  for (const Move& move : moves) {
    if (!move.view.eligible || &move == best) continue;
    const auto key = RankKey(move, p_rule, action);
    if (ScoresTie(key.first, best_key.first) && ScoresTie(key.second, best_key.second)) {
      ties.push_back(move.view.term);
    }
  }
  return best;
}

bool SearchContext::Improves(const Move& best, MoveAction action, std::string& rule) const {
  const std::string verb = action == MoveAction::kAdd ? "adding " : "removing ";
  if (criterion_->is_p_value_rule()) {
    const double p = *best.view.p;
    if (action == MoveAction::kAdd) {
      const bool take = p < options_.entry_p;
      rule = "entry p-value of " + best.view.term + " " + FormatPValue(p) +
             (take ? ", below entry_p " : ", not below entry_p ") + Threshold(options_.entry_p) +
             (take ? "" : ": no term enters");
      return take;
    }
    const bool take = p > options_.exit_p;
    rule = "exit p-value of " + best.view.term + " " + FormatPValue(p) +
           (take ? ", above exit_p " : ", not above exit_p ") + Threshold(options_.exit_p) +
           (take ? "" : ": no term leaves");
    return take;
  }
  const Score current = CurrentScore();
  const std::string name = criterion_->ValueName();
  const double after = criterion_->Reported(*best.score.value);
  if (!current.defined()) {
    rule = verb + best.view.term + " gives " + name + " " + FormatCriterionValue(options_.criterion, after) +
           " (the current model's is undefined: " + current.undefined_reason + ")";
    return true;
  }
  const double before = criterion_->Reported(*current.value);
  const bool take = *best.score.value < *current.value && !ScoresTie(*best.score.value, *current.value);
  rule = (take ? "" : "best move, ") + verb + best.view.term + ", takes " + name + " from " +
         FormatCriterionValue(options_.criterion, before) + " to " +
         FormatCriterionValue(options_.criterion, after) + (take ? "" : ": no improvement");
  return take;
}

std::string SearchContext::IneligibleSummary(const std::vector<Move>& moves) {
  std::vector<std::pair<std::string, std::size_t>> counts;
  for (const Move& move : moves) {
    if (move.view.eligible) continue;
    std::string kind = move.view.reason.substr(0, move.view.reason.find(':'));
    auto found = std::find_if(counts.begin(), counts.end(), [&](const auto& item) { return item.first == kind; });
    if (found == counts.end()) counts.emplace_back(kind, 1);
    else ++found->second;
  }
  std::string text;
  for (const auto& [kind, count] : counts) {
    if (!text.empty()) text += ", ";
    text += std::to_string(count) + " " + kind;
  }
  return text;
}

void SearchContext::Apply(const Move& move, const std::string& rule,
                          const std::vector<std::string>& ties) {
  DecisionEvent event;
  event.step_index = step_index_++;
  event.action = move.view.action;
  event.term = move.view.term;
  event.term_index = move.term;
  event.criterion_before = Reported(CurrentScore());
  const auto& columns = term_columns_[move.term];
  if (move.view.action == MoveAction::kAdd) {
    if (!state_.Add(columns)) {
      throw NumericalError("internal: term '" + move.view.term +
                           "' scored as not aliased but could not be added to the model");
    }
    in_model_[move.term] = 1;
    model_terms_.push_back(move.term);
  } else {
    state_.Remove(columns);
    in_model_[move.term] = 0;
    model_terms_.erase(std::find(model_terms_.begin(), model_terms_.end(), move.term));
  }
  event.criterion_after = Reported(CurrentScore());
  event.rss_after = state_.Rss();
  event.f = move.view.f;
  event.p = move.view.p;
  event.rule = rule;
  event.ties = ties;
  event.model_terms = ModelTermNames();
  sink_.OnDecision(event);
}

void SearchContext::Stop(SearchOutcome outcome, const std::string& rule) {
  outcome_ = outcome;
  stop_rule_ = rule;
  StopEvent event;
  event.step_index = step_index_++;
  event.outcome = outcome;
  event.rule = rule;
  event.criterion_value = Reported(CurrentScore());
  event.rss = state_.Rss();
  event.model_terms = ModelTermNames();
  sink_.OnStop(event);
}

std::vector<std::size_t> SearchContext::ModelKey() const {
  std::vector<std::size_t> key = model_terms_;
  std::sort(key.begin(), key.end());
  return key;
}

std::vector<std::size_t> SearchContext::ModelKeyAfter(const Move& move) const {
  std::vector<std::size_t> key = model_terms_;
  if (move.view.action == MoveAction::kAdd) key.push_back(move.term);
  else key.erase(std::find(key.begin(), key.end(), move.term));
  std::sort(key.begin(), key.end());
  return key;
}

void SearchContext::SetModel(const std::vector<std::size_t>& terms_in_order) {
  state_ = ModelState(factor_, run_.kernel);
  std::fill(in_model_.begin(), in_model_.end(), 0);
  model_terms_.clear();
  if (!base_columns_.empty()) state_.Add(base_columns_);
  for (std::size_t term : terms_in_order) {
    if (!state_.Add(term_columns_[term])) {
      throw NumericalError("internal: term '" + term_name(term) + "' of a subset could not be added");
    }
    in_model_[term] = 1;
    model_terms_.push_back(term);
  }
}

}  // namespace stepledger::selection_detail
