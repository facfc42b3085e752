// The exit statuses RunCli maps from what a command throws (CONTRACT.md exit statuses;
// STYLE.md habit 4): bad input exits 2, numerical failures and programmer bugs exit 3.

#include "stepledger/cli/run_cli.h"

#include <gtest/gtest.h>

#include <new>
#include <sstream>
#include <stdexcept>
#include <string>

#include "stepledger/engine/errors.h"

namespace stepledger {
namespace {

struct Outcome {
  int status = -1;
  std::string err;
};

template <typename Throw>
Outcome RunThrowing(Throw throw_it) {
  std::ostringstream err;
  Outcome outcome;
  outcome.status = RunCommandAction(
      [&]() -> int {
        throw_it();
        return 0;
      },
      err);
  outcome.err = err.str();
  return outcome;
}

TEST(RunCommandAction, LogicErrorIsAnInternalErrorWithExit3) {
  const Outcome outcome = RunThrowing([] { throw std::logic_error("RunSearch: sizes 4 and 6"); });
  EXPECT_EQ(outcome.status, static_cast<int>(ExitStatus::kFailure));
  EXPECT_EQ(outcome.err,
            "stepledger: internal error (a bug; please report it): RunSearch: sizes 4 and 6\n");
}

TEST(RunCommandAction, InvalidArgumentIsALogicErrorToo) {
  const Outcome outcome = RunThrowing([] { throw std::invalid_argument("Predictor: no factor"); });
  EXPECT_EQ(outcome.status, static_cast<int>(ExitStatus::kFailure));
  EXPECT_NE(outcome.err.find("internal error"), std::string::npos) << outcome.err;
}

TEST(RunCommandAction, InputAndPlanErrorsExit2WithTheirMessage) {
  Outcome outcome = RunThrowing([] { throw InputError("data.csv:3:7: not a number"); });
  EXPECT_EQ(outcome.status, static_cast<int>(ExitStatus::kBadInput));
  EXPECT_EQ(outcome.err, "stepledger: data.csv:3:7: not a number\n");
  outcome = RunThrowing([] { throw PlanError("terms[2].name", "empty"); });
  EXPECT_EQ(outcome.status, static_cast<int>(ExitStatus::kBadInput));
  EXPECT_EQ(outcome.err, "stepledger: plan key 'terms[2].name': empty\n");
}

TEST(RunCommandAction, NumericalAndOtherFailuresExit3) {
  Outcome outcome = RunThrowing([] { throw NumericalError("factor not finite"); });
  EXPECT_EQ(outcome.status, static_cast<int>(ExitStatus::kFailure));
  EXPECT_EQ(outcome.err, "stepledger: numerical failure: factor not finite\n");
  outcome = RunThrowing([] { throw std::runtime_error("disk\nfull"); });
  EXPECT_EQ(outcome.status, static_cast<int>(ExitStatus::kFailure));
  EXPECT_EQ(outcome.err, "stepledger: internal error: disk full\n");
  outcome = RunThrowing([] { throw 42; });
  EXPECT_EQ(outcome.status, static_cast<int>(ExitStatus::kFailure));
  EXPECT_NE(outcome.err.find("internal error"), std::string::npos) << outcome.err;
}

// Memory running out under a limit is neither bad input nor a bug: exit 3 saying what to change.
TEST(RunCommandAction, OutOfMemoryExits3SayingWhatToChange) {
  const Outcome outcome = RunThrowing([] { throw std::bad_alloc(); });
  EXPECT_EQ(outcome.status, static_cast<int>(ExitStatus::kFailure));
  EXPECT_EQ(outcome.err.rfind("stepledger: out of memory: ", 0), 0u) << outcome.err;
  EXPECT_NE(outcome.err.find("fewer --threads"), std::string::npos) << outcome.err;
  EXPECT_EQ(outcome.err.find("internal error"), std::string::npos) << outcome.err;
}

TEST(RunCommandAction, AResourceErrorExits3WithItsMessage) {
  const Outcome outcome = RunThrowing([] { throw ResourceError("not enough address space: raise the limit"); });
  EXPECT_EQ(outcome.status, static_cast<int>(ExitStatus::kFailure));
  EXPECT_EQ(outcome.err, "stepledger: not enough address space: raise the limit\n");
}

TEST(RunCommandAction, ReturnsTheActionsStatusWhenNothingIsThrown) {
  std::ostringstream err;
  EXPECT_EQ(RunCommandAction([] { return 1; }, err), 1);
  EXPECT_TRUE(err.str().empty());
}

}  // namespace
}  // namespace stepledger
