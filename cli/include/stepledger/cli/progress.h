#pragma once
// A progress line on stderr for long runs, fed by the search observer's step events, by a long
// all-subsets search's work so far (nodes of its tree, models kept, seconds) and, after the
// search, by the bootstrap's progress events (units done, rate, time left).
//
// It stays silent for the first `delay` of a run (most runs end before anyone waits) and is
// never made unless stderr is a terminal (MakeProgressPrinter), so scripts, pipes and tests
// never see it. The line is rewritten in place ("\r") and cleared when the search stops.

#include <chrono>
#include <memory>
#include <ostream>

#include "stepledger/selection/observer.h"

namespace stepledger::cli {

class ProgressPrinter : public SearchObserver {
 public:
  /// label starts the line ("select", "rerun"); delay is the silence before the first line.
  ProgressPrinter(std::ostream& err, std::string label,
                  std::chrono::milliseconds delay = std::chrono::milliseconds(2000));
  void OnStart(const StartEvent& event) override;
  void OnCandidate(const CandidateScore& candidate) override;
  void OnDecision(const DecisionEvent& event) override;
  void OnStop(const StopEvent& event) override;
  void OnProgress(const ProgressEvent& event) override;
  void OnSubsetProgress(const SubsetProgressEvent& event) override;

 private:
  /// Whether a line may be written now (after the delay, at most five a second); if so, the
  /// line is taken as shown.
  bool Due();
  void Show();
  void Clear();
  std::ostream& err_;
  std::string label_;
  std::chrono::milliseconds delay_;
  std::chrono::steady_clock::time_point started_;
  std::chrono::steady_clock::time_point last_shown_;
  std::size_t steps_ = 0;
  std::size_t candidates_ = 0;
  std::string last_move_;
  bool shown_ = false;
  std::string stage_;                                   // the progress stage being timed
  std::chrono::steady_clock::time_point stage_started_;
};

/// A printer when stderr is a terminal and the run is not --quiet; else nullptr.
std::unique_ptr<ProgressPrinter> MakeProgressPrinter(std::ostream& err, bool quiet, std::string label);

}  // namespace stepledger::cli
