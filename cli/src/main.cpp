// The executable: everything happens in RunCli so that tests can run it in-process.
#include <iostream>
#include <string>
#include <vector>

#include <signal.h>
#include <unistd.h>

#include "stepledger/cli/printable_text.h"
#include "stepledger/cli/run_cli.h"
#include "stepledger/engine/spill.h"
#ifdef STEPLEDGER_WITH_MPI
#include <optional>
#include <sstream>

#include "stepledger/cluster/mpi_session.h"
#endif

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

#ifdef STEPLEDGER_WITH_MPI
// Under mpirun: process 0 prints and writes as a plain run does; the others print nothing (their
// errors are process 0's too, learnt in the exchanges), except an internal failure of their own,
// which could leave process 0 waiting: it is printed and the job aborted.
int RunUnderMpirun(int argc, char** argv) {
  std::optional<stepledger::MpiSession> session;
  try {
    session.emplace(&argc, &argv);
  } catch (const std::exception& error) {
    std::cerr << "stepledger: cannot start MPI: " << error.what() << "\n";
    return 3;
  }
  std::vector<std::string> args(argv + (argc > 0 ? 1 : 0), argv + argc);
  stepledger::ShareExchange& shares = session->shares();
  int status = 0;
  if (shares.index() == 0) {
    if (::isatty(STDOUT_FILENO)) {
      stepledger::PrintableTextStream out(std::cout);
      status = stepledger::RunCli(args, out, std::cerr, &shares);
    } else {
      status = stepledger::RunCli(args, std::cout, std::cerr, &shares);
    }
  } else {
    std::ostringstream out, err;
    status = stepledger::RunCli(args, out, err, &shares);
    if (status == 3) {
      std::cerr << "stepledger (process " << shares.index() << "): " << err.str();
      session->Abort(status);
    }
  }
  return status;
}
#endif

int main(int argc, char** argv) {
  RemoveSpillOnSignals();
#ifdef STEPLEDGER_WITH_MPI
  if (stepledger::MpiSession::LaunchedByMpirun()) return RunUnderMpirun(argc, argv);
#endif
  std::vector<std::string> args(argv + (argc > 0 ? 1 : 0), argv + argc);
  // On a terminal, tables and reports are escaped like the messages (printable_text.h); into a
  // file or a pipe, stdout carries the bytes as they are (a CSV of prices keeps its fields).
  if (::isatty(STDOUT_FILENO)) {
    stepledger::PrintableTextStream out(std::cout);
    return stepledger::RunCli(args, out, std::cerr);
  }
  return stepledger::RunCli(args, std::cout, std::cerr);
}
