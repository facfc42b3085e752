#pragma once
// Route events of a search, and a recorder that keeps them as value types.
//
// A search emits, in order: OnStart once; then for every step the candidates it scored
// (OnCandidate) followed by OnDecision (a term added or removed) or OnStop (the end, with
// the rule that ended it); all-subsets also emits OnSubsets before OnStop. The search knows
// nothing of JSON or terminals: the audit and the command line observe.

#include <cstddef>
#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "stepledger/selection/plan.h"

namespace stepledger {

enum class MoveAction { kAdd, kRemove };
/// "add", "remove".
const char* ToString(MoveAction action);

/// One candidate move as scored in a step.
struct CandidateScore {
  std::string term;
  std::size_t term_index = 0;          ///< Design term index
  MoveAction action = MoveAction::kAdd;
  std::size_t df = 0;                  ///< design columns moved
  std::optional<double> rss;           ///< RSS of the model after the move (unset when aliased)
  std::optional<double> score;         ///< criterion value of the model after the move (reported units)
  std::optional<double> f, p;          ///< partial F of the term and its p-value (entry or exit)
  bool eligible = false;
  std::string reason;                  ///< why not eligible; empty when eligible
  /// Criterion cv only: held-out weighted SSE per fold of the model after the move (fold order,
  /// data units); empty otherwise and when the score is undefined.
  std::vector<double> fold_sse;
};

/// Terms left out of the search before it starts, and why (never, aliased, ...).
struct ExcludedTerm {
  std::string term;
  std::string reason;
};

struct StartEvent {
  Method method = Method::kStepwise;
  Criterion criterion = Criterion::kBic;
  std::vector<std::string> model_terms;      ///< the starting model (no intercept)
  std::vector<std::string> candidate_terms;  ///< terms the search may move, plan order
  std::vector<ExcludedTerm> excluded;
  double n = 0;
  std::size_t k = 0;                         ///< coefficients of the starting model
  double rss = 0;
  std::optional<double> criterion_value;     ///< of the starting model, reported units
  std::string rule;                          ///< how the start was chosen
};

struct DecisionEvent {
  std::size_t step_index = 0;                ///< 1, 2, ... (0 is the start)
  MoveAction action = MoveAction::kAdd;
  std::string term;
  std::size_t term_index = 0;
  std::optional<double> criterion_before;    ///< reported units
  std::optional<double> criterion_after;
  double rss_after = 0;
  std::optional<double> f, p;                ///< of the move
  std::string rule;                          ///< the rule that made the decision, in words
  std::vector<std::string> ties;             ///< other candidates that scored equal (plan order lost)
  std::vector<std::string> model_terms;      ///< the model after the step (no intercept)
};

enum class SearchOutcome {
  kNotRun,                ///< sentinel of a default SearchResult
  kCompleted,             ///< the method ran to its natural end (all-subsets, none, every term in)
  kStoppedNoImprovement,  ///< no eligible move improves the criterion / passes entry_p or exit_p
  kStoppedMaxTerms,       ///< max_terms reached
  kCycleDetected,         ///< the next move would return to a model seen before
  kNoEligibleTerms,       ///< no candidate could be moved at all (listed with reasons)
};
/// "not-run", "completed", "stopped-no-improvement", "stopped-max-terms", "cycle-detected",
/// "no-eligible-terms".
const char* ToString(SearchOutcome outcome);

struct StopEvent {
  std::size_t step_index = 0;
  SearchOutcome outcome = SearchOutcome::kCompleted;
  std::string rule;
  std::optional<double> criterion_value;  ///< of the final model, reported units
  double rss = 0;                         ///< of the final model
  std::vector<std::string> model_terms;   ///< the final model
};

/// One model kept by all-subsets.
struct SubsetRecord {
  std::size_t size = 0;             ///< terms in the model (keep terms included, no intercept)
  std::vector<std::string> terms;   ///< plan order
  std::vector<std::size_t> term_indices;
  double rss = 0;
  std::optional<double> score;      ///< criterion value (reported units); unset when undefined
  std::size_t rank_in_size = 1;     ///< 1 = smallest RSS of its size
  std::vector<double> fold_sse;     ///< criterion cv only: held-out SSE per fold (fold order)
};

/// Progress of a long stage after the search (the bootstrap): `done` of `total` units. Stages:
/// "bootstrap rows" (used rows folded into every replicate's factor) and "bootstrap replicates"
/// (replicates whose selection has run). Sent from the thread that called RunPlan.
struct ProgressEvent {
  std::string stage;
  std::uint64_t done = 0;
  std::uint64_t total = 0;
};

/// Progress of a long all-subsets search (the regression tree, selection/src/subset_tree.cpp):
/// the work done so far, whose total is not known in advance. Sent from the thread that called
/// RunSearch, every SearchRunOptions::progress_seconds while the search runs.
struct SubsetProgressEvent {
  std::uint64_t nodes = 0;        ///< nodes of the tree formed so far (every thread)
  std::uint64_t models_kept = 0;  ///< models on the board of best models per size
  double seconds = 0;             ///< since the search began
};

class SearchObserver {
 public:
  virtual ~SearchObserver() = default;
  virtual void OnStart(const StartEvent& /*event*/) {}
  virtual void OnCandidate(const CandidateScore& /*candidate*/) {}
  virtual void OnDecision(const DecisionEvent& /*event*/) {}
  virtual void OnSubsets(const std::vector<SubsetRecord>& /*subsets*/) {}
  virtual void OnStop(const StopEvent& /*event*/) {}
  virtual void OnProgress(const ProgressEvent& /*event*/) {}
  virtual void OnSubsetProgress(const SubsetProgressEvent& /*event*/) {}
};

enum class StepAction { kStart, kAdd, kRemove, kStop };
/// "start", "add", "remove", "stop" (CONTRACT.md steps[].action).
const char* ToString(StepAction action);

/// One step of the route (CONTRACT.md `steps[]`, without the digest the audit adds).
struct RouteStep {
  std::size_t index = 0;
  StepAction action = StepAction::kStart;
  std::string term;                        ///< empty for start and stop
  std::optional<double> criterion_before;  ///< add/remove only
  std::optional<double> criterion_value;   ///< the model after the step, reported units
  std::optional<double> rss;               ///< the model after the step
  std::optional<double> f, p;              ///< add/remove: of the move
  std::vector<CandidateScore> candidates;  ///< scored since the previous step
  std::string rule;
  std::vector<std::string> ties;
  std::vector<std::string> model_terms;    ///< after the step
};

/// Stores every event as value types: the `steps` and `subsets` of CONTRACT.md.
class RouteRecorder : public SearchObserver {
 public:
  void OnStart(const StartEvent& event) override;
  void OnCandidate(const CandidateScore& candidate) override;
  void OnDecision(const DecisionEvent& event) override;
  void OnSubsets(const std::vector<SubsetRecord>& subsets) override;
  void OnStop(const StopEvent& event) override;

  const std::vector<RouteStep>& steps() const { return steps_; }
  const std::vector<SubsetRecord>& subsets() const { return subsets_; }
  const std::vector<ExcludedTerm>& excluded() const { return excluded_; }

 private:
  std::vector<RouteStep> steps_;
  std::vector<SubsetRecord> subsets_;
  std::vector<ExcludedTerm> excluded_;
  std::vector<CandidateScore> pending_;
};

/// Forwards every event to several observers (null entries are skipped), in order.
class ObserverFanOut : public SearchObserver {
 public:
  explicit ObserverFanOut(std::vector<SearchObserver*> observers);
  void OnStart(const StartEvent& event) override;
  void OnCandidate(const CandidateScore& candidate) override;
  void OnDecision(const DecisionEvent& event) override;
  void OnSubsets(const std::vector<SubsetRecord>& subsets) override;
  void OnStop(const StopEvent& event) override;
  void OnProgress(const ProgressEvent& event) override;
  void OnSubsetProgress(const SubsetProgressEvent& event) override;

 private:
  std::vector<SearchObserver*> observers_;
};

}  // namespace stepledger
