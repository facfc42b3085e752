#pragma once
// The only code that calls MPI (Open MPI; built when STEPLEDGER_WITH_MPI is on). It gives the
// command line an engine/share_exchange.h over MPI_COMM_WORLD when the program was started by
// mpirun; a program started plainly never initialises MPI.

#include <memory>

#include "stepledger/engine/share_exchange.h"

namespace stepledger {

class MpiSession {
 public:
  /// True when the environment says mpirun (or another launcher of Open MPI) started this process.
  static bool LaunchedByMpirun();
  /// Initialises MPI (MPI_THREAD_FUNNELED: only the main thread calls MPI).
  MpiSession(int* argc, char*** argv);
  /// MPI_Finalize.
  ~MpiSession();
  MpiSession(const MpiSession&) = delete;
  MpiSession& operator=(const MpiSession&) = delete;
  /// The processes of MPI_COMM_WORLD as a ShareExchange.
  ShareExchange& shares();
  /// Ends every process of the job at once (MPI_Abort): only when this process failed where the
  /// others cannot learn of it (an internal error outside an exchange).
  [[noreturn]] void Abort(int status);

 private:
  std::unique_ptr<ShareExchange> shares_;
};

}  // namespace stepledger
