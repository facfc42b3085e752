#pragma once
// How many threads of a task may be inside LAPACK at once.
//
// OpenBLAS gives every thread that is inside one of its routines at the same time a work buffer
// of its own (about 144 MB of address space with the thread's stack), and when an address-space
// limit (`ulimit -v`) refuses a new one it retries forever instead of failing. A task that
// spreads linear algebra over threads (the factor pass, the all-subsets search, the bootstrap)
// asks here first and runs no more threads than fit.

#include <cstddef>
#include <string>

namespace stepledger {

/// At most `wanted` (>= 1): `wanted` when the address space has no limit or the BLAS is not
/// OpenBLAS; else the buffers OpenBLAS already holds plus the new ones that fit in what the limit
/// leaves (keeping room for the rest of the run). Throws ResourceError (engine/errors.h) naming
/// `task` ("the factor pass") when not even one thread fits.
std::size_t ThreadsForLinearAlgebra(std::size_t wanted, const std::string& task);

}  // namespace stepledger
