// The progress line of long runs (cli/progress.h): silent before its delay, then one line
// rewritten in place, cleared when the search stops; never made when stderr is not a terminal.

#include "stepledger/cli/progress.h"

#include <gtest/gtest.h>
#include <unistd.h>

#include <sstream>
#include <thread>

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

TEST(ProgressPrinter, BootstrapProgressShowsUnitsRateAndTimeLeftThenClears) {
  std::ostringstream err;
  cli::ProgressPrinter printer(err, "select", std::chrono::milliseconds(0));
  printer.OnProgress({"bootstrap rows", 4096, 1000000});
  EXPECT_NE(err.str().find("select: bootstrap rows 4,096 of 1,000,000"), std::string::npos) << err.str();
  EXPECT_EQ(err.str().find('\n'), std::string::npos) << "one line, rewritten in place";
  // The rate and the time left need half a second of the stage behind them.
  std::this_thread::sleep_for(std::chrono::milliseconds(600));
  printer.OnProgress({"bootstrap rows", 500000, 1000000});
  EXPECT_NE(err.str().find("a second, about "), std::string::npos) << err.str();
  EXPECT_NE(err.str().find(" s left"), std::string::npos) << err.str();
  printer.OnProgress({"bootstrap replicates", 200, 200});
  EXPECT_EQ(err.str().substr(err.str().size() - 4), "\r\033[K") << "the line is cleared when the stage ends";
}

TEST(ProgressPrinter, AllSubsetsProgressShowsNodesModelsKeptAndSecondsThenClears) {
  std::ostringstream err;
  cli::ProgressPrinter printer(err, "select", std::chrono::milliseconds(0));
  printer.OnSubsetProgress({12345678, 153, 14.7});
  EXPECT_NE(err.str().find("select: all subsets, 12,345,678 nodes of the search tree, 153 models kept, 14 s"),
            std::string::npos)
      << err.str();
  EXPECT_EQ(err.str().find('\n'), std::string::npos) << "one line, rewritten in place";
  printer.OnStop(StopEvent{});
  EXPECT_EQ(err.str().substr(err.str().size() - 4), "\r\033[K") << "the line is cleared when the search stops";
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
