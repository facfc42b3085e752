// The progress line of long runs (cli/progress.h): silent before its delay, then one line
// rewritten in place, cleared when the search stops; never made when stderr is not a terminal.

#include "stepledger/cli/progress.h"

#include <gtest/gtest.h>
#include <unistd.h>

#include <sstream>

#include "support/cli_run.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

TEST(ProgressPrinter, SilentBeforeItsDelay) {
  std::ostringstream err;
  cli::ProgressPrinter printer(err, "select", std::chrono::hours(1));
  printer.OnStart(StartEvent{});
  DecisionEvent decision;
  decision.step_index = 1;
  decision.term = "age";
  printer.OnDecision(decision);
  printer.OnStop(StopEvent{});
  EXPECT_EQ(err.str(), "");
}

TEST(ProgressPrinter, AfterItsDelayShowsTheStepAndClearsTheLineAtTheEnd) {
  std::ostringstream err;
  cli::ProgressPrinter printer(err, "select", std::chrono::milliseconds(0));
  DecisionEvent decision;
  decision.step_index = 1;
  decision.action = MoveAction::kRemove;
  decision.term = "cpu";
  printer.OnDecision(decision);
  EXPECT_NE(err.str().find("select: 0 s, step 1, 0 candidates scored, last: remove cpu"), std::string::npos)
      << err.str();
  EXPECT_EQ(err.str().find('\n'), std::string::npos) << "one line, rewritten in place";
  printer.OnStop(StopEvent{});
  EXPECT_EQ(err.str().substr(err.str().size() - 4), "\r\033[K") << "the line is cleared";
}

TEST(ProgressPrinter, NotMadeWhenStderrIsNotATerminalOrTheRunIsQuiet) {
  std::ostringstream err;
  // ctest runs with stderr redirected; a terminal run of this binary still checks --quiet.
  EXPECT_EQ(cli::MakeProgressPrinter(err, /*quiet=*/true, "select"), nullptr);
  if (isatty(STDERR_FILENO) == 0) {
    EXPECT_EQ(cli::MakeProgressPrinter(err, false, "select"), nullptr);
  }
}

}  // namespace
}  // namespace stepledger
