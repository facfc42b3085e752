#!/usr/bin/env bash
# The whole test suite under AddressSanitizer (leak detection on) and UndefinedBehaviorSanitizer,
# in its own build folder, build-asan/ (STEPLEDGER_SANITIZE=ON; DEVELOPERS.md "Fuzzing and
# sanitizers"). Any report fails the run: ASan stops at the first error, leaks fail the program
# at exit, and undefined behaviour ends it (-fno-sanitize-recover). Tests that run the
# `stepledger` program as a child run this build's instrumented one.
#
#   SANITIZE_BUILD_DIR   build folder (default build-asan/ in the repository)
#   SANITIZE_CXX         compiler (default clang++; g++ works too)
#   SANITIZE_JOBS        parallel compile and test jobs (default: the cores)
#   SANITIZE_WITH_FUZZ   1: also build the libFuzzer targets in this folder (Clang; the libraries
#                        get libFuzzer's coverage instrumentation too), so that
#                        FUZZ_BUILD_DIR=build-asan scripts/fuzz.sh needs no second build (CI)
#   extra arguments      passed to ctest, e.g. -R csv to run some tests only
set -euo pipefail
root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
bash "$root/scripts/setup-debian.sh"
build="${SANITIZE_BUILD_DIR:-$root/build-asan}"
jobs="${SANITIZE_JOBS:-$(nproc)}"

# Debug with -O1: assertions stay on (NDEBUG unset), and -O1 keeps both the build and the
# instrumented tests reasonably fast.
cmake -S "$root" -B "$build" -DCMAKE_CXX_COMPILER="${SANITIZE_CXX:-clang++}" \
  -DCMAKE_BUILD_TYPE=Debug -DCMAKE_CXX_FLAGS_DEBUG="-O1 -g" -DSTEPLEDGER_SANITIZE=ON -DSTEPLEDGER_WITH_MPI=OFF \
  -DSTEPLEDGER_BUILD_BENCH=OFF -DSTEPLEDGER_BUILD_EXAMPLES=OFF -DSTEPLEDGER_BUILD_PYTHON=OFF \
  -DSTEPLEDGER_BUILD_FUZZ="$([[ "${SANITIZE_WITH_FUZZ:-0}" == 1 ]] && echo ON || echo OFF)" >/dev/null
start=$SECONDS
cmake --build "$build" -j"$jobs"
echo "sanitize: built in $((SECONDS - start)) s"

export ASAN_OPTIONS="detect_leaks=1:abort_on_error=1:${ASAN_OPTIONS:-}"
export LSAN_OPTIONS="suppressions=$root/scripts/lsan.supp:print_suppressions=0:${LSAN_OPTIONS:-}"
export UBSAN_OPTIONS="print_stacktrace=1:halt_on_error=1:${UBSAN_OPTIONS:-}"
start=$SECONDS
ctest --test-dir "$build" --output-on-failure -j"$jobs" -LE not-under-sanitizers "$@"
echo "sanitize: tests ran in $((SECONDS - start)) s"
