#pragma once
// Runs the command line in-process (RunCli) and keeps what it printed.

#include <string>
#include <vector>

namespace stepledger::testing {

struct CliRun {
  int status = -1;
  std::string out;
  std::string err;
  /// Lines of err (a bad-input error must be exactly one).
  std::vector<std::string> ErrLines() const;
};

/// RunCli(args, ...) with args not including the program name.
CliRun RunStepledger(const std::vector<std::string>& args);

}  // namespace stepledger::testing
