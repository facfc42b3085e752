#include "stepledger/cli/progress.h"

#include <unistd.h>

#include <string>

#include "stepledger/cli/printable_text.h"
#include "stepledger/engine/number_format.h"

namespace stepledger::cli {

ProgressPrinter::ProgressPrinter(std::ostream& err, std::string label, std::chrono::milliseconds delay)
    : err_(err), label_(std::move(label)), delay_(delay), started_(std::chrono::steady_clock::now()) {}

void ProgressPrinter::OnStart(const StartEvent& /*event*/) { Show(); }

void ProgressPrinter::OnCandidate(const CandidateScore& /*candidate*/) {
  ++candidates_;
  Show();
}

void ProgressPrinter::OnDecision(const DecisionEvent& event) {
  ++steps_;
  last_move_ = std::string(event.action == MoveAction::kAdd ? "add " : "remove ") + PrintableText(event.term);
  Show();
}

void ProgressPrinter::OnStop(const StopEvent& /*event*/) { Clear(); }

void ProgressPrinter::Clear() {
  if (shown_) err_ << "\r\033[K" << std::flush;  // clear the line: the results follow on stdout
  shown_ = false;
}

void ProgressPrinter::OnProgress(const ProgressEvent& event) {
  const auto now = std::chrono::steady_clock::now();
  if (event.stage != stage_) {
    stage_ = event.stage;
    stage_started_ = now;
  }
  if (event.done >= event.total) {
    Clear();
    return;
  }
  if (!Due()) return;
  const double elapsed = std::chrono::duration<double>(now - stage_started_).count();
  err_ << "\r\033[K" << label_ << ": " << PrintableText(event.stage) << " "
       << FormatCount(static_cast<std::int64_t>(event.done)) << " of "
       << FormatCount(static_cast<std::int64_t>(event.total));
  if (elapsed > 0.5 && event.done > 0) {
    const double rate = static_cast<double>(event.done) / elapsed;
    const double left = static_cast<double>(event.total - event.done) / rate;
    err_ << ", " << FormatCount(static_cast<std::int64_t>(rate)) << " a second, about "
         << static_cast<std::int64_t>(left + 0.5) << " s left";
  }
  err_ << std::flush;
}

bool ProgressPrinter::Due() {
  const auto now = std::chrono::steady_clock::now();
  if (now - started_ < delay_) return false;
  // At most a few lines a second: a candidate event can come every microsecond.
  if (shown_ && now - last_shown_ < std::chrono::milliseconds(200)) return false;
  last_shown_ = now;
  shown_ = true;
  return true;
}

void ProgressPrinter::OnSubsetProgress(const SubsetProgressEvent& event) {
  if (!Due()) return;
  err_ << "\r\033[K" << label_ << ": all subsets, " << FormatCount(static_cast<std::int64_t>(event.nodes))
       << " nodes of the search tree, " << FormatCount(static_cast<std::int64_t>(event.models_kept))
       << " models kept, " << static_cast<std::int64_t>(event.seconds) << " s" << std::flush;
}

void ProgressPrinter::Show() {
  if (!Due()) return;
  const auto now = std::chrono::steady_clock::now();
  const auto seconds = std::chrono::duration_cast<std::chrono::seconds>(now - started_).count();
  err_ << "\r\033[K" << label_ << ": " << seconds << " s, step " << steps_ << ", "
       << FormatCount(static_cast<std::int64_t>(candidates_)) << " candidates scored";
  if (!last_move_.empty()) err_ << ", last: " << last_move_;
  err_ << std::flush;
}

std::unique_ptr<ProgressPrinter> MakeProgressPrinter(std::ostream& err, bool quiet, std::string label) {
  if (quiet || isatty(STDERR_FILENO) == 0) return nullptr;
  return std::make_unique<ProgressPrinter>(err, std::move(label));
}

}  // namespace stepledger::cli
