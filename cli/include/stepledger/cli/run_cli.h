#pragma once
// The command line as a function, so that tests run it in-process (STYLE.md, habit 10).

#include <functional>
#include <ostream>
#include <string>
#include <vector>

namespace stepledger {

class ShareExchange;

/// Exit statuses of every command (CONTRACT.md).
enum class ExitStatus : int {
  kDone = 0,              ///< the command did its work
  kDifferenceFound = 1,   ///< verify/compare found a difference or tampering
  kBadInput = 2,          ///< bad usage or bad input: one line on stderr naming the place
  kFailure = 3,           ///< a numerical or internal failure
};

/// Runs `stepledger` with args, which do NOT include the program name: {"fit", "data.csv",
/// "--plan", "plan.json"}. Results go to out, messages and logs to err. Returns the exit
/// status (ExitStatus as int). Never throws.
int RunCli(const std::vector<std::string>& args, std::ostream& out, std::ostream& err);

/// The same as one of several processes sharing the work (a cluster run under mpirun; `shares`
/// numbers them). `select` and `fit` read the data shared (RunOptions::shares); process 0 prints
/// and writes everything, and any other command runs on process 0 alone (the others return 0 at
/// once). The other processes should be given streams that discard what they write.
int RunCli(const std::vector<std::string>& args, std::ostream& out, std::ostream& err, ShareExchange* shares);

/// Runs one command's action and maps what it throws to an exit status, writing one line to
/// err: InputError/PlanError -> kBadInput (2); NumericalError -> kFailure (3);
/// std::logic_error (a programmer bug: a broken internal rule, never bad input) and any other
/// exception -> kFailure (3) with an "internal error" line; ShareServed (run/run_plan.h: this
/// process of a shared run is done) -> kDone (0) without a line. RunCli runs every command through
/// it. Never throws (beyond what writing to err throws).
int RunCommandAction(const std::function<int()>& action, std::ostream& err);

}  // namespace stepledger
