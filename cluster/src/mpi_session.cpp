#include "stepledger/cluster/mpi_session.h"

#include <mpi.h>

#include <algorithm>
#include <climits>
#include <cstdint>
#include <cstdlib>
#include <stdexcept>
#include <string>

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
    Check(MPI_Ssend(&size, 1, MPI_UINT64_T, to, kTag, MPI_COMM_WORLD), "MPI_Ssend");
    for (std::size_t at = 0; at < bytes.size(); at += kPieceBytes) {
      const int piece = static_cast<int>(std::min(kPieceBytes, bytes.size() - at));
      Check(MPI_Ssend(bytes.data() + at, piece, MPI_BYTE, to, kTag, MPI_COMM_WORLD), "MPI_Ssend");
    }
  }

  std::string Receive(int from) override {
    std::uint64_t size = 0;
    Check(MPI_Recv(&size, 1, MPI_UINT64_T, from, kTag, MPI_COMM_WORLD, MPI_STATUS_IGNORE), "MPI_Recv");
    std::string bytes(size, '\0');
    for (std::size_t at = 0; at < bytes.size(); at += kPieceBytes) {
      const int piece = static_cast<int>(std::min(kPieceBytes, bytes.size() - at));
      Check(MPI_Recv(bytes.data() + at, piece, MPI_BYTE, from, kTag, MPI_COMM_WORLD, MPI_STATUS_IGNORE), "MPI_Recv");
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
