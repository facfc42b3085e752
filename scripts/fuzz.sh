#!/usr/bin/env bash
# Builds the libFuzzer targets under fuzz/ with Clang, AddressSanitizer and
# UndefinedBehaviorSanitizer into build-fuzz/ (only the libraries they need), replays the inputs
# that once found a problem (fuzz/regressions/<target>/), then fuzzes each target in turn for an
# even share of FUZZ_SECONDS, starting from its seeds (fuzz/corpus/<target>/). Fails when any
# target finds a crash, a sanitizer report, a leak, a hang or an exception other than the
# bad-input kinds; the input is kept under build-fuzz/findings/<target>/ and printed.
# DEVELOPERS.md "Fuzzing and sanitizers" says how to run longer and what to do with a finding.
#
#   FUZZ_SECONDS     total fuzzing time in seconds, split across the targets (default 60)
#   FUZZ_TARGETS     the targets to run (default: all, as listed in fuzz/CMakeLists.txt)
#   FUZZ_BUILD_DIR   build folder (default build-fuzz/ in the repository); a folder made by
#                    SANITIZE_WITH_FUZZ=1 scripts/sanitize.sh is reused as it is, tests and all
#   FUZZ_JOBS        compile jobs (default: the cores)
#   FUZZ_TIMEOUT     seconds one input may take before it counts as a hang (default 25)
#   FUZZ_SEED        libFuzzer's random seed (default: a new one each run); CI fixes it, so a
#                    finding there comes again with the same seed
set -euo pipefail
root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
bash "$root/scripts/setup-debian.sh"
build="${FUZZ_BUILD_DIR:-$root/build-fuzz}"
seconds="${FUZZ_SECONDS:-60}"
jobs="${FUZZ_JOBS:-$(nproc)}"
timeout="${FUZZ_TIMEOUT:-25}"
all_targets=$(sed -n 's/^set(stepledger_fuzz_targets \(.*\))$/\1/p' "$root/fuzz/CMakeLists.txt")
read -r -a targets <<<"${FUZZ_TARGETS:-$all_targets}"
for target in "${targets[@]}"; do
  if [[ " $all_targets " != *" $target "* ]]; then
    echo "fuzz: unknown target '$target' (targets: $all_targets)" >&2
    exit 2
  fi
done

# Debug with -O1: assertions on, sanitizers and coverage instrumentation on every library.
# A folder that already builds the tests (the sanitizer build) keeps them: the flags are the
# same, so nothing is compiled twice.
tests=OFF
grep -qs '^STEPLEDGER_BUILD_TESTS:BOOL=ON' "$build/CMakeCache.txt" && tests=ON
cmake -S "$root" -B "$build" -DCMAKE_CXX_COMPILER=clang++ -DCMAKE_BUILD_TYPE=Debug \
  -DCMAKE_CXX_FLAGS_DEBUG="-O1 -g" -DSTEPLEDGER_BUILD_FUZZ=ON -DSTEPLEDGER_BUILD_TESTS="$tests" \
  -DSTEPLEDGER_BUILD_BENCH=OFF -DSTEPLEDGER_BUILD_EXAMPLES=OFF -DSTEPLEDGER_BUILD_PYTHON=OFF >/dev/null
start=$SECONDS
cmake --build "$build" -j"$jobs" --target "${targets[@]/#/fuzz_}"
echo "fuzz: built in $((SECONDS - start)) s"

export ASAN_OPTIONS="detect_leaks=1:${ASAN_OPTIONS:-}"
export LSAN_OPTIONS="suppressions=$root/scripts/lsan.supp:print_suppressions=0:${LSAN_OPTIONS:-}"
export UBSAN_OPTIONS="print_stacktrace=1:halt_on_error=1:${UBSAN_OPTIONS:-}"
export OPENBLAS_NUM_THREADS=1
share=$((seconds / ${#targets[@]}))
((share >= 1)) || share=1

failed=()
for target in "${targets[@]}"; do
  program="$build/fuzz/fuzz_$target"
  findings="$build/findings/$target"
  corpus="$build/corpus/$target"  # grows here; the seeds in fuzz/corpus are only read
  mkdir -p "$findings" "$corpus"
  rm -f "$findings"/crash-* "$findings"/leak-* "$findings"/timeout-* "$findings"/oom-* "$findings"/slow-unit-*
  options=(-timeout="$timeout" -rss_limit_mb=2048 -artifact_prefix="$findings/" -print_final_stats=1)
  [[ -n "${FUZZ_SEED:-}" ]] && options+=(-seed="$FUZZ_SEED")
  dictionary="$root/fuzz/dictionaries/$target.dict"
  [[ -f "$dictionary" ]] && options+=(-dict="$dictionary")

  status=0
  regressions="$root/fuzz/regressions/$target"
  if [[ -d "$regressions" ]] && [[ -n "$(ls -A "$regressions")" ]]; then
    echo "fuzz: $target: replaying $(ls -A "$regressions" | wc -l) regression inputs"
    "$program" "${options[@]}" -runs=0 "$regressions" >"$findings/replay.log" 2>&1 || status=$?
    if ((status != 0)); then
      tail -n 60 "$findings/replay.log"
      echo "fuzz: $target: a regression input fails again (log: $findings/replay.log)" >&2
      failed+=("$target")
      continue
    fi
  fi

  echo "fuzz: $target: fuzzing for $share s"
  "$program" "${options[@]}" -max_total_time="$share" "$corpus" "$root/fuzz/corpus/$target" \
    >"$findings/fuzz.log" 2>&1 || status=$?
  grep -aE '^(stat::number_of_executed_units|stat::average_exec_per_sec|stat::peak_rss_mb)' "$findings/fuzz.log" |
    sed "s/^/fuzz: $target: /" || true
  shopt -s nullglob
  found=("$findings"/crash-* "$findings"/leak-* "$findings"/timeout-* "$findings"/oom-*)
  shopt -u nullglob
  if ((status != 0)) || ((${#found[@]} > 0)); then
    grep -av '^#[0-9]' "$findings/fuzz.log" | tail -n 80
    for file in "${found[@]}"; do
      echo "---- $file ($(stat -c %s "$file") bytes; shown with cat -v, at most 2000 bytes):"
      head -c 2000 "$file" | cat -v
      echo
      echo "---- reproduce: $program $file"
    done
    echo "fuzz: $target: FOUND A PROBLEM (exit $status; log: $findings/fuzz.log). Keep the input as" \
         "fuzz/regressions/$target/<name> once it is fixed." >&2
    failed+=("$target")
  fi
done

if ((${#failed[@]} > 0)); then
  echo "fuzz: findings in: ${failed[*]}" >&2
  exit 1
fi
echo "fuzz: no findings (${#targets[@]} targets, $share s each)"
