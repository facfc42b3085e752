#pragma once
// The command line as a function, so that tests run it in-process (STYLE.md, habit 10).

#include <ostream>
#include <string>
#include <vector>

namespace stepledger {

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

}  // namespace stepledger
