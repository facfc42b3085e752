#include "support/cli_run.h"

#include <sstream>

#include "stepledger/cli/run_cli.h"

namespace stepledger::testing {

std::vector<std::string> CliRun::ErrLines() const {
  std::vector<std::string> lines;
  std::istringstream stream(err);
  for (std::string line; std::getline(stream, line);) lines.push_back(line);
  return lines;
}

CliRun RunStepledger(const std::vector<std::string>& args) {
  std::ostringstream out, err;
  CliRun run;
  run.status = RunCli(args, out, err);
  run.out = out.str();
  run.err = err.str();
  return run;
}

}  // namespace stepledger::testing
