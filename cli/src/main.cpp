// The executable: everything happens in RunCli so that tests can run it in-process.
#include <iostream>
#include <string>
#include <vector>

#include <signal.h>
#include <unistd.h>

#include "stepledger/cli/printable_text.h"
#include "stepledger/cli/run_cli.h"
#include "stepledger/engine/spill.h"

namespace {

// On SIGINT, SIGTERM or SIGHUP: remove the typed spill (async-signal-safe), then die of the
// signal as if unhandled, so that the parent sees the usual status.
extern "C" void RemoveSpillAndDie(int signal_number) {
  stepledger::RemoveSpillFilesNow();
  ::signal(signal_number, SIG_DFL);
  ::raise(signal_number);
}

void RemoveSpillOnSignals() {
  struct sigaction action {};
  action.sa_handler = RemoveSpillAndDie;
  sigemptyset(&action.sa_mask);
  for (int signal_number : {SIGINT, SIGTERM, SIGHUP}) {
    struct sigaction previous {};
    // A signal ignored by the parent (nohup, a shell's background job) stays ignored.
    if (::sigaction(signal_number, nullptr, &previous) == 0 && previous.sa_handler == SIG_IGN) continue;
    ::sigaction(signal_number, &action, nullptr);
  }
}

}  // namespace

int main(int argc, char** argv) {
  RemoveSpillOnSignals();
  std::vector<std::string> args(argv + (argc > 0 ? 1 : 0), argv + argc);
  // On a terminal, tables and reports are escaped like the messages (printable_text.h); into a
  // file or a pipe, stdout carries the bytes as they are (a CSV of prices keeps its fields).
  if (::isatty(STDOUT_FILENO)) {
    stepledger::PrintableTextStream out(std::cout);
    return stepledger::RunCli(args, out, std::cerr);
  }
  return stepledger::RunCli(args, std::cout, std::cerr);
}
