// The executable: everything happens in RunCli so that tests can run it in-process.
#include <iostream>
#include <string>
#include <vector>

#include "stepledger/cli/run_cli.h"

int main(int argc, char** argv) {
  std::vector<std::string> args(argv + (argc > 0 ? 1 : 0), argv + argc);
  return stepledger::RunCli(args, std::cout, std::cerr);
}
