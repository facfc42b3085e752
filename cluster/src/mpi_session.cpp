#include "stepledger/cluster/mpi_session.h"

#include <mpi.h>

#include <algorithm>
#include <chrono>
#include <climits>
#include <cstdint>
#include <cstdlib>
#include <stdexcept>
#include <string>
#include <thread>

namespace stepledger {
namespace {

// One tag for everything: between two processes, messages arrive in the order they were sent,
// and the protocol (run/src/shared_run.h) says what comes next.
constexpr int kTag = 14;
// A message longer than MPI's int count goes in pieces.
constexpr std::size_t kPieceBytes = std::size_t{1} << 30;

void Check(int code, const char* what) {
  if (code == MPI_SUCCESS) return;
  char text[MPI_MAX_ERROR_STRING] = {};
  int length = 0;
  MPI_Error_string(code, text, &length);
  throw std::runtime_error(std::string(what) + " failed: " + std::string(text, static_cast<std::size_t>(length)));
}

// Waits for a request without holding a core: Open MPI's blocking calls poll without pause, and a
// process that waits (the others while process 0 runs the search, process 0 while the others
// scan) would take a core from the processes and threads that work. A short spin first keeps the
// latency of a quick answer; then sleeps growing to 0.1 ms (a stream of replayed rows must not wait long between batches).
void Wait(MPI_Request& request, const char* what) {
  int done = 0;
  for (int spin = 0; spin < 2000; ++spin) {
    Check(MPI_Test(&request, &done, MPI_STATUS_IGNORE), what);
    if (done) return;
  }
  auto pause = std::chrono::microseconds(5);
  for (;;) {
    Check(MPI_Test(&request, &done, MPI_STATUS_IGNORE), what);
    if (done) return;
    std::this_thread::sleep_for(pause);
    pause = std::min<std::chrono::microseconds>(pause * 2, std::chrono::microseconds(100));
  }
}

class MpiExchange : public ShareExchange {
 public:
  MpiExchange() {
    Check(MPI_Comm_rank(MPI_COMM_WORLD, &index_), "MPI_Comm_rank");
    Check(MPI_Comm_size(MPI_COMM_WORLD, &count_), "MPI_Comm_size");
  }
  int index() const override { return index_; }
  int count() const override { return count_; }

  // Synchronous sends: a sender waits until its message is being taken, so that a stream of
  // replayed rows never piles up at the receiver (one batch in flight per process).
  void Send(int to, const std::string& bytes) override {
    std::uint64_t size = bytes.size();
    MPI_Request request;
    Check(MPI_Issend(&size, 1, MPI_UINT64_T, to, kTag, MPI_COMM_WORLD, &request), "MPI_Issend");
    Wait(request, "MPI_Issend");
    for (std::size_t at = 0; at < bytes.size(); at += kPieceBytes) {
      const int piece = static_cast<int>(std::min(kPieceBytes, bytes.size() - at));
      Check(MPI_Issend(bytes.data() + at, piece, MPI_BYTE, to, kTag, MPI_COMM_WORLD, &request), "MPI_Issend");
      Wait(request, "MPI_Issend");
    }
  }

  std::string Receive(int from) override {
    std::uint64_t size = 0;
    MPI_Request request;
    Check(MPI_Irecv(&size, 1, MPI_UINT64_T, from, kTag, MPI_COMM_WORLD, &request), "MPI_Irecv");
    Wait(request, "MPI_Irecv");
    std::string bytes(size, '\0');
    for (std::size_t at = 0; at < bytes.size(); at += kPieceBytes) {
      const int piece = static_cast<int>(std::min(kPieceBytes, bytes.size() - at));
      Check(MPI_Irecv(bytes.data() + at, piece, MPI_BYTE, from, kTag, MPI_COMM_WORLD, &request), "MPI_Irecv");
      Wait(request, "MPI_Irecv");
    }
    return bytes;
  }

 private:
  int index_ = 0;
  int count_ = 1;
};

}  // namespace

bool MpiSession::LaunchedByMpirun() {
  for (const char* name : {"OMPI_COMM_WORLD_SIZE", "PMIX_RANK", "PMI_RANK"}) {
    if (std::getenv(name) != nullptr) return true;
  }
  return false;
}

MpiSession::MpiSession(int* argc, char*** argv) {
  int provided = 0;
  Check(MPI_Init_thread(argc, argv, MPI_THREAD_FUNNELED, &provided), "MPI_Init_thread");
  // Errors come back as codes (Check), so that a message names what failed.
  MPI_Comm_set_errhandler(MPI_COMM_WORLD, MPI_ERRORS_RETURN);
  shares_ = std::make_unique<MpiExchange>();
}

MpiSession::~MpiSession() {
  shares_.reset();
  MPI_Finalize();
}

ShareExchange& MpiSession::shares() { return *shares_; }

void MpiSession::Abort(int status) {
  MPI_Abort(MPI_COMM_WORLD, status);
  std::abort();
}

}  // namespace stepledger
