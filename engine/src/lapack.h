#pragma once
// Private, thin wrappers over the few LAPACK/BLAS routines the engine calls (column-major,
// Fortran calling convention). Each wrapper documents the routine's contract, runs the
// workspace query first where LAPACK has one, treats info < 0 as a bug (NumericalError naming
// the routine and argument) and returns info > 0 to the caller as an outcome to report.
//
// Every wrapper that can reach OpenBLAS's work buffer (all but the rotations) first makes sure
// the buffer can exist: a call that would need a new one when the address space has no room for
// it throws ResourceError (engine/errors.h) instead of letting OpenBLAS spin forever.
//
// Nothing outside engine/src includes this file.

#include <cstddef>
#include <cstdint>

namespace stepledger::lapack {

/// Asks OpenBLAS (when it is the BLAS in use) for one thread: the engine's passes bring their own
/// threads, and idle OpenBLAS threads spin in sched_yield. Idempotent and cheap.
void UseOneBlasThread();

/// Address space a thread needs the first time it is inside a LAPACK call while the threads
/// already inside hold every work buffer: OpenBLAS gives each concurrent caller a buffer of its
/// own (BUFFER_SIZE, 128 MiB on its x86-64 builds; kept for reuse once allocated), plus a thread
/// stack and slack. OpenBLAS retries such an allocation forever when a limit such as `ulimit -v`
/// refuses it, so the wrappers below check first (see LapackCallersAllowed).
inline constexpr std::uint64_t kLapackCallerBytes = std::uint64_t{144} << 20;
/// Room kept for the rest of a run when the concurrent callers are counted.
inline constexpr std::uint64_t kRunReserveBytes = std::uint64_t{32} << 20;

/// How many threads may be inside LAPACK at once, at most `wanted`: `wanted` when the BLAS is not
/// OpenBLAS or the address space has no limit (RLIMIT_AS); else the work buffers OpenBLAS already
/// holds (as far as these wrappers have seen) plus as many new callers as fit, each
/// kLapackCallerBytes, in what the limit leaves beyond kRunReserveBytes. 0 when not even one can
/// call. For a pass that spreads LAPACK calls over threads.
std::size_t LapackCallersAllowed(std::size_t wanted);

/// Triangular-pentagonal QR (dtpqrt): on entry a is the n x n upper triangle R, b is m x n
/// and pentagonal (its first m - l rows dense, its last l rows upper trapezoidal; l = 0 for
/// a dense block of rows, l = n = m for another triangle). On exit a holds R' with
/// R'^T R' = R^T R + B^T B and b is overwritten (Householder vectors). The work array is of
/// the fixed size nb x n (LAPACK has no workspace query for this routine); the block size
/// nb is chosen here. Never fails for finite input (info > 0 does not exist).
void FoldPentagonal(int m, int n, int l, double* a, int lda, double* b, int ldb);

/// dlartg: plane rotation [c s; -s c] with c f + s g = r, -s f + c g = 0.
void GenerateRotation(double f, double g, double& c, double& s, double& r);

/// drot: applies the plane rotation to the vectors x and y of length n with strides.
void ApplyRotation(int n, double* x, int incx, double* y, int incy, double c, double s);

/// dtrtrs: solves op(A) X = B for X (overwriting B), A upper triangular n x n.
/// transpose: false for A X = B, true for A^T X = B. Returns info (> 0: A(info, info) is zero).
int SolveUpperTriangular(bool transpose, int n, int nrhs, const double* a, int lda, double* b,
                         int ldb);

/// dpotri: given the upper triangular U (any diagonal signs), overwrites its upper triangle with
/// the upper triangle of (U^T U)^-1. Returns info (> 0: U(info, info) is zero).
int InverseFromUpperFactor(int n, double* a, int lda);

/// dtrcon: reciprocal condition number, 1-norm, of the upper triangular A (n x n).
/// Returns 1 for n = 0.
double UpperTriangularRcond(int n, const double* a, int lda);

/// dgeqrf: Householder QR of the m x n matrix a in place (R in the upper triangle, vectors
/// below). Workspace query first.
void HouseholderQr(int m, int n, double* a, int lda);

}  // namespace stepledger::lapack
