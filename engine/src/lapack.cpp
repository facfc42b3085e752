#include "lapack.h"

#include <algorithm>
#include <string>
#include <vector>

#include "stepledger/engine/errors.h"

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
  // Block size of the compact WY representation: 32 columns balances BLAS-3 speed and the
  // size of T; LAPACK requires 1 <= nb <= n.
  const int nb = std::min(n, 32);
  std::vector<double> t(static_cast<std::size_t>(nb) * n);
  std::vector<double> work(static_cast<std::size_t>(nb) * n);
  int info = 0;
  dtpqrt_(&m, &n, &l, &nb, a, &lda, b, &ldb, t.data(), &nb, work.data(), &info);
  CheckArguments("dtpqrt", info);
}

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
  int info = 0;
  const char uplo = 'U', trans = transpose ? 'T' : 'N', diag = 'N';
  dtrtrs_(&uplo, &trans, &diag, &n, &nrhs, a, &lda, b, &ldb, &info, 1, 1, 1);
  CheckArguments("dtrtrs", info);
  return info;
}

int InverseFromUpperFactor(int n, double* a, int lda) {
  if (n == 0) return 0;
  int info = 0;
  const char uplo = 'U';
  dpotri_(&uplo, &n, a, &lda, &info, 1);
  CheckArguments("dpotri", info);
  return info;
}

double UpperTriangularRcond(int n, const double* a, int lda) {
  if (n == 0) return 1.0;
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
