#include "stepledger/selection/observer.h"

#include <utility>

namespace stepledger {

const char* ToString(MoveAction action) {
  return action == MoveAction::kAdd ? "add" : "remove";
}

const char* ToString(StepAction action) {
  switch (action) {
    case StepAction::kStart: return "start";
    case StepAction::kAdd: return "add";
    case StepAction::kRemove: return "remove";
    case StepAction::kStop: return "stop";
  }
  return "?";
}

const char* ToString(SearchOutcome outcome) {
  switch (outcome) {
    case SearchOutcome::kNotRun: return "not-run";
    case SearchOutcome::kCompleted: return "completed";
    case SearchOutcome::kStoppedNoImprovement: return "stopped-no-improvement";
    case SearchOutcome::kStoppedMaxTerms: return "stopped-max-terms";
    case SearchOutcome::kCycleDetected: return "cycle-detected";
    case SearchOutcome::kNoEligibleTerms: return "no-eligible-terms";
  }
  return "?";
}

void RouteRecorder::OnStart(const StartEvent& event) {
  steps_.clear();
  subsets_.clear();
  pending_.clear();
  excluded_ = event.excluded;
  RouteStep step;
  step.index = 0;
  step.action = StepAction::kStart;
  step.criterion_value = event.criterion_value;
  step.rss = event.rss;
  step.rule = event.rule;
  step.model_terms = event.model_terms;
  steps_.push_back(std::move(step));
}

void RouteRecorder::OnCandidate(const CandidateScore& candidate) { pending_.push_back(candidate); }

void RouteRecorder::OnDecision(const DecisionEvent& event) {
  RouteStep step;
  step.index = event.step_index;
  step.action = event.action == MoveAction::kAdd ? StepAction::kAdd : StepAction::kRemove;
  step.term = event.term;
  step.criterion_before = event.criterion_before;
  step.criterion_value = event.criterion_after;
  step.rss = event.rss_after;
  step.f = event.f;
  step.p = event.p;
  step.candidates = std::move(pending_);
  pending_.clear();
  step.rule = event.rule;
  step.ties = event.ties;
  step.model_terms = event.model_terms;
  steps_.push_back(std::move(step));
}

void RouteRecorder::OnSubsets(const std::vector<SubsetRecord>& subsets) { subsets_ = subsets; }

void RouteRecorder::OnStop(const StopEvent& event) {
  RouteStep step;
  step.index = event.step_index;
  step.action = StepAction::kStop;
  step.criterion_value = event.criterion_value;
  step.rss = event.rss;
  step.candidates = std::move(pending_);
  pending_.clear();
  step.rule = event.rule;
  step.model_terms = event.model_terms;
  steps_.push_back(std::move(step));
}

ObserverFanOut::ObserverFanOut(std::vector<SearchObserver*> observers)
    : observers_(std::move(observers)) {}

void ObserverFanOut::OnStart(const StartEvent& event) {
  for (auto* observer : observers_) if (observer) observer->OnStart(event);
}
void ObserverFanOut::OnCandidate(const CandidateScore& candidate) {
  for (auto* observer : observers_) if (observer) observer->OnCandidate(candidate);
}
void ObserverFanOut::OnDecision(const DecisionEvent& event) {
  for (auto* observer : observers_) if (observer) observer->OnDecision(event);
}
void ObserverFanOut::OnSubsets(const std::vector<SubsetRecord>& subsets) {
  for (auto* observer : observers_) if (observer) observer->OnSubsets(subsets);
}
void ObserverFanOut::OnStop(const StopEvent& event) {
  for (auto* observer : observers_) if (observer) observer->OnStop(event);
}

void ObserverFanOut::OnProgress(const ProgressEvent& event) {
  for (auto* observer : observers_) if (observer) observer->OnProgress(event);
}

void ObserverFanOut::OnSubsetProgress(const SubsetProgressEvent& event) {
  for (auto* observer : observers_) if (observer) observer->OnSubsetProgress(event);
}

}  // namespace stepledger
