#include "lapack.h"

#include <sys/resource.h>
#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <fstream>
#include <string>
#include <vector>

#include "stepledger/engine/errors.h"
#include "stepledger/engine/linear_algebra_threads.h"

// Fortran LAPACK/BLAS (reference LAPACK 3.11 via OpenBLAS on Debian). Character arguments carry
// a hidden length (gfortran convention: size_t after all other arguments); we pass 1.
extern "C" {
// A (n x n upper), B (m x n, last l rows upper trapezoidal) -> R in A, V in B; T is nb x n.
void dtpqrt_(const int* m, const int* n, const int* l, const int* nb, double* a, const int* lda,
             double* b, const int* ldb, double* t, const int* ldt, double* work, int* info);
// Plane rotation: c*f + s*g = r, -s*f + c*g = 0 (LAPACK 3.10+: r >= 0 sign conventions aside).
void dlartg_(const double* f, const double* g, double* c, double* s, double* r);
// x := c x + s y, y := c y - s x.
void drot_(const int* n, double* x, const int* incx, double* y, const int* incy, const double* c,
           const double* s);
// op(A) X = B, A triangular; info > 0: A(info,info) = 0 exactly.
void dtrtrs_(const char* uplo, const char* trans, const char* diag, const int* n, const int* nrhs,
             const double* a, const int* lda, double* b, const int* ldb, int* info, std::size_t,
             std::size_t, std::size_t);
// Inverse of U^T U from its Cholesky factor U; info > 0: U(info,info) = 0.
void dpotri_(const char* uplo, const int* n, double* a, const int* lda, int* info, std::size_t);
// Reciprocal condition number of a triangular matrix (estimate, exact for small n mostly).
void dtrcon_(const char* norm, const char* uplo, const char* diag, const int* n, const double* a,
             const int* lda, double* rcond, double* work, int* iwork, int* info, std::size_t,
             std::size_t, std::size_t);
// Householder QR; lwork = -1 is the workspace query.
void dgeqrf_(const int* m, const int* n, double* a, const int* lda, double* tau, double* work,
             const int* lwork, int* info);
}

// Weak: present when OpenBLAS is the BLAS in use, null otherwise (reference BLAS has one thread).
extern "C" void openblas_set_num_threads(int threads) __attribute__((weak));

namespace stepledger::lapack {

void UseOneBlasThread() {
  if (openblas_set_num_threads != nullptr) openblas_set_num_threads(1);
}

namespace {

// ---- room for OpenBLAS's work buffers --------------------------------------------------------
// OpenBLAS keeps a table of work buffers: a caller takes a free one or allocates a new one (and
// never gives it back), retrying forever when the allocation fails. in_flight counts the callers
// inside a wrapper now; buffers, the most that have ever been inside at once (each had a buffer).

std::atomic<std::size_t> in_flight{0};
std::atomic<std::size_t> buffers{0};

struct AddressSpace {
  bool limited = false;
  std::uint64_t limit = 0;
  std::uint64_t used = 0;
};

AddressSpace CurrentAddressSpace() {
  AddressSpace space;
  rlimit limit{};
  if (openblas_set_num_threads == nullptr || getrlimit(RLIMIT_AS, &limit) != 0 || limit.rlim_cur == RLIM_INFINITY) {
    return space;
  }
  std::uint64_t pages = 0;
  std::ifstream("/proc/self/statm") >> pages;  // the first field: the whole address space, in pages
  if (pages == 0) return space;  // cannot tell: trust the limit to be wide enough
  space.limited = true;
  space.limit = limit.rlim_cur;
  space.used = pages * static_cast<std::uint64_t>(sysconf(_SC_PAGESIZE));
  return space;
}

std::string Megabytes(std::uint64_t bytes) { return std::to_string(bytes >> 20) + " MB"; }

std::uint64_t Room(const AddressSpace& space) { return space.used < space.limit ? space.limit - space.used : 0; }

// One caller inside a wrapper: checks that a new buffer, when this caller needs one, has room.
class CallerGuard {
 public:
  CallerGuard() {
    const std::size_t inside = in_flight.fetch_add(1) + 1;
    if (inside <= buffers.load()) return;  // a buffer is free for this caller
    const AddressSpace space = CurrentAddressSpace();
    if (space.limited && Room(space) < kLapackCallerBytes) {
      in_flight.fetch_sub(1);
      throw ResourceError("not enough address space for the linear algebra: the limit (ulimit -v) is " +
                          Megabytes(space.limit) + " and " + Megabytes(space.used) +
                          " are in use, but a thread inside LAPACK needs about " + Megabytes(kLapackCallerBytes) +
                          " more (OpenBLAS's work buffer); raise the limit, or use fewer --threads");
    }
    std::size_t known = buffers.load();
    while (known < inside && !buffers.compare_exchange_weak(known, inside)) {
    }
  }
  ~CallerGuard() { in_flight.fetch_sub(1); }
  CallerGuard(const CallerGuard&) = delete;
  CallerGuard& operator=(const CallerGuard&) = delete;
};

// info < 0 means we passed an illegal argument: a bug in this file or its caller.
void CheckArguments(const char* routine, int info) {
  if (info < 0) {
    throw NumericalError(std::string("internal error: LAPACK ") + routine + " rejected argument " +
                         std::to_string(-info));
  }
}

}  // namespace

void FoldPentagonal(int m, int n, int l, double* a, int lda, double* b, int ldb) {
  if (m <= 0 || n <= 0) return;
  const CallerGuard guard;
  // Block size of the compact WY representation: 32 columns balances BLAS-3 speed and the
  // size of T; LAPACK requires 1 <= nb <= n.
  const int nb = std::min(n, 32);
  std::vector<double> t(static_cast<std::size_t>(nb) * n);
  std::vector<double> work(static_cast<std::size_t>(nb) * n);
  int info = 0;
  dtpqrt_(&m, &n, &l, &nb, a, &lda, b, &ldb, t.data(), &nb, work.data(), &info);
  CheckArguments("dtpqrt", info);
}

std::size_t LapackCallersAllowed(std::size_t wanted) {
  const AddressSpace space = CurrentAddressSpace();
  if (!space.limited) return wanted;
  const std::uint64_t room = Room(space);
  const std::uint64_t spare = room > kRunReserveBytes ? room - kRunReserveBytes : 0;
  const std::uint64_t allowed = buffers.load() + spare / kLapackCallerBytes;
  return static_cast<std::size_t>(std::min<std::uint64_t>(wanted, allowed));
}

}  // namespace stepledger::lapack

namespace stepledger {

std::size_t ThreadsForLinearAlgebra(std::size_t wanted, const std::string& task) {
  const std::size_t allowed = lapack::LapackCallersAllowed(std::max<std::size_t>(wanted, 1));
  if (allowed == 0) {
    throw ResourceError("not enough address space for " + task + ": the limit (ulimit -v) leaves less than the " +
                        std::to_string((lapack::kLapackCallerBytes + lapack::kRunReserveBytes) >> 20) +
                        " MB that one thread inside LAPACK needs (OpenBLAS's work buffer); raise the limit");
  }
  return allowed;
}

}  // namespace stepledger

namespace stepledger::lapack {

void GenerateRotation(double f, double g, double& c, double& s, double& r) {
  dlartg_(&f, &g, &c, &s, &r);
}

void ApplyRotation(int n, double* x, int incx, double* y, int incy, double c, double s) {
  if (n <= 0) return;
  drot_(&n, x, &incx, y, &incy, &c, &s);
}

int SolveUpperTriangular(bool transpose, int n, int nrhs, const double* a, int lda, double* b,
                         int ldb) {
  if (n == 0 || nrhs == 0) return 0;
  const CallerGuard guard;
  int info = 0;
  const char uplo = 'U', trans = transpose ? 'T' : 'N', diag = 'N';
  dtrtrs_(&uplo, &trans, &diag, &n, &nrhs, a, &lda, b, &ldb, &info, 1, 1, 1);
  CheckArguments("dtrtrs", info);
  return info;
}

int InverseFromUpperFactor(int n, double* a, int lda) {
  if (n == 0) return 0;
  const CallerGuard guard;
  int info = 0;
  const char uplo = 'U';
  dpotri_(&uplo, &n, a, &lda, &info, 1);
  CheckArguments("dpotri", info);
  return info;
}

double UpperTriangularRcond(int n, const double* a, int lda) {
  if (n == 0) return 1.0;
  const CallerGuard guard;
  double rcond = 0;
  std::vector<double> work(3 * static_cast<std::size_t>(n));
  std::vector<int> iwork(static_cast<std::size_t>(n));
  int info = 0;
  const char norm = '1', uplo = 'U', diag = 'N';
  dtrcon_(&norm, &uplo, &diag, &n, a, &lda, &rcond, work.data(), iwork.data(), &info, 1, 1, 1);
  CheckArguments("dtrcon", info);
  return rcond;
}

void HouseholderQr(int m, int n, double* a, int lda) {
  if (m == 0 || n == 0) return;
  const CallerGuard guard;
  std::vector<double> tau(static_cast<std::size_t>(std::min(m, n)));
  int info = 0;
  int lwork = -1;
  double optimal = 0;
  dgeqrf_(&m, &n, a, &lda, tau.data(), &optimal, &lwork, &info);
  CheckArguments("dgeqrf (workspace query)", info);
  lwork = std::max(1, static_cast<int>(optimal));
  std::vector<double> work(static_cast<std::size_t>(lwork));
  dgeqrf_(&m, &n, a, &lda, tau.data(), work.data(), &lwork, &info);
  CheckArguments("dgeqrf", info);
}

}  // namespace stepledger::lapack
