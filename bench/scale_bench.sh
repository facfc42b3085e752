#!/usr/bin/env bash
# The scale benchmark: stepledger's commands on generated numeric CSV files of 20 columns at a
# million rows and more, and the pandas + numpy route a user would take instead, measured side
# by side in one run. Prints one Markdown table on stdout (progress goes to stderr).
#
#   bench/scale_bench.sh [ROWS...]          e.g. bench/scale_bench.sh 200000 1000000
#
# Settings (environment):
#   ROWS              sizes to measure, unless given as arguments   (default "1000000 10000000")
#   THREADS           thread counts                                 (default "1 2")
#   REPEAT            runs of each command: the table shows the fastest time and the largest
#                     peak                                          (default 1)
#   BUILD_DIR         the Release build folder                      (default <repo>/build)
#   WORK_DIR          where the data files go (a fresh folder is made inside and removed at the
#                     end; 10M rows is about 2.2 GB)                (default $TMPDIR or /tmp)
#   KEEP=1            keep the work folder
#   PREDICT_MAX_ROWS  largest size `predict` runs on                (default 1000000)
#   PYTHON            interpreter with pandas and numpy             (default /usr/bin/python3)
#   BUILD=0           do not build the stepledger and scale_gen targets first
#   BUILD_JOBS        parallel jobs of that build                   (default 1)
#
# Each command runs REPEAT times per size and thread count, under /usr/bin/time for the peak
# resident memory. Every data file is read once (into the page cache) before its size is measured, so
# no command pays the disk for the others. `--threads N` is passed only to the commands whose
# `--help` lists it; for the others the threads-1 row runs with the command's default and the
# threads-2 row says n/a. MB are 10^6 bytes; MB/s is the data file's size over the wall time.
# Exit status: 0 when every command ran and stepledger's coefficients agree with numpy's; 1
# otherwise (the table still prints). Goals not met do not change the exit status.

# shellcheck disable=SC2016,SC2317  # backticks are Markdown; cleanup and the tests run indirectly
set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
repo="$(cd "$here/.." && pwd)"

if (($# > 0)); then ROWS="$*"; else ROWS="${ROWS:-1000000 10000000}"; fi
THREADS="${THREADS:-1 2}"
REPEAT="${REPEAT:-1}"
BUILD_DIR="${BUILD_DIR:-$repo/build}"
PREDICT_MAX_ROWS="${PREDICT_MAX_ROWS:-1000000}"
PYTHON="${PYTHON:-/usr/bin/python3}"
STEPLEDGER="$BUILD_DIR/cli/stepledger"
SCALE_GEN="$BUILD_DIR/bench/scale_gen"

for value in $ROWS $THREADS $PREDICT_MAX_ROWS $REPEAT; do
  [[ "$value" =~ ^[1-9][0-9]*$ ]] || { echo "scale_bench: '$value' is not a positive whole number (ROWS, THREADS, PREDICT_MAX_ROWS, REPEAT)" >&2; exit 2; }
done
[[ -x /usr/bin/time ]] || { echo "scale_bench: /usr/bin/time is needed for the peak memory (Debian package 'time')" >&2; exit 2; }
"$PYTHON" -c 'import pandas, numpy' 2>/dev/null || { echo "scale_bench: $PYTHON cannot import pandas and numpy (Debian python3-pandas, python3-numpy)" >&2; exit 2; }

if [[ "${BUILD:-1}" != 0 ]]; then
  echo "scale_bench: building stepledger and scale_gen in $BUILD_DIR" >&2
  nice cmake --build "$BUILD_DIR" -j"${BUILD_JOBS:-1}" --target stepledger scale_gen >&2
fi
[[ -x "$STEPLEDGER" && -x "$SCALE_GEN" ]] || { echo "scale_bench: $STEPLEDGER or $SCALE_GEN missing; configure $BUILD_DIR with -DSTEPLEDGER_BUILD_BENCH=ON" >&2; exit 2; }

work="$(mktemp -d "${WORK_DIR:-${TMPDIR:-/tmp}}/stepledger-scale.XXXXXX")"
cleanup() { if [[ "${KEEP:-0}" == 1 ]]; then echo "scale_bench: kept $work" >&2; else rm -rf "$work"; fi; }
trap cleanup EXIT

status=0
rows_table=()   # the Markdown rows, in measuring order
notes=()        # lines printed under the table

# --- helpers ------------------------------------------------------------------------------

has_threads_option() { "$STEPLEDGER" "$1" --help 2>/dev/null | grep -Eq -- '^ +--threads( |$)'; }

# Runs a command REPEAT times; sets RUN_SECONDS (the fastest run), RUN_PEAK_KB (the largest
# peak) and RUN_OK (1 when every run succeeded). Stdout goes to $RUN_STDOUT; the path in
# RUN_CLEAN (if any) is removed before each run so that outputs are written afresh.
run_measured() {
  local timing="$work/time.txt" stderr_file="$work/stderr.txt" start end seconds peak attempt
  RUN_OK=1 RUN_SECONDS="" RUN_PEAK_KB=0
  for ((attempt = 1; attempt <= REPEAT; attempt++)); do
    if [[ -n "${RUN_CLEAN:-}" ]]; then rm -rf "$RUN_CLEAN"; fi
    start=$(date +%s%N)
    if ! /usr/bin/time -f '%M' -o "$timing" "$@" >"$RUN_STDOUT" 2>"$stderr_file"; then
      RUN_OK=0
      status=1
      echo "scale_bench: failed: $*" >&2
      sed 's/^/  | /' "$stderr_file" >&2
    fi
    end=$(date +%s%N)
    seconds=$(awk -v a="$start" -v b="$end" 'BEGIN { printf "%.3f", (b - a) / 1e9 }')
    peak=$(tail -n 1 "$timing")
    if [[ -z "$RUN_SECONDS" ]] || awk -v a="$seconds" -v b="$RUN_SECONDS" 'BEGIN { exit !(a < b) }'; then RUN_SECONDS=$seconds; fi
    if ((peak > RUN_PEAK_KB)); then RUN_PEAK_KB=$peak; fi
    if ((RUN_OK == 0)); then break; fi
  done
  RUN_CLEAN=""
}

mb_per_s() { awk -v bytes="$1" -v s="$2" 'BEGIN { printf "%.1f", bytes / 1e6 / s }'; }
peak_mb() { awk -v kb="$1" 'BEGIN { printf "%.0f", kb * 1024 / 1e6 }'; }
human_size() {
  awk -v b="$1" 'BEGIN { if (b < 1e3) printf "%d B", b; else if (b < 1e6) printf "%.1f kB", b / 1e3;
                         else if (b < 1e9) printf "%.2f MB", b / 1e6; else printf "%.2f GB", b / 1e9 }'
}
ratio() { awk -v a="$1" -v b="$2" 'BEGIN { printf "%.2f", a / b }'; }
at_least() { awk -v a="$1" -v b="$2" 'BEGIN { exit !(a >= b) }'; }
below() { awk -v a="$1" -v b="$2" 'BEGIN { exit !(a < b) }'; }
verdict() { if "$@"; then echo yes; else echo no; fi; }   # verdict at_least 0.7 0.5 -> yes

# Rows are printed grouped by size, then command (in the order below), then thread count.
command_order=('`profile`' '`fit`' '`select' '`predict' 'pandas')
add_row() {  # command rows threads time mb_s peak output goal met
  local command_index=0 i
  for i in "${!command_order[@]}"; do
    if [[ "$1" == "${command_order[$i]}"* ]]; then command_index=$i; fi
  done
  rows_table+=("$size_index"$'\t'"$command_index"$'\t'"$threads_index"$'\t'"| $1 | $2 | $3 | $4 | $5 | $6 | $7 | $8 | $9 |")
}
rows_label() { awk -v r="$1" 'BEGIN { if (r % 1e6 == 0) printf "%dM", r / 1e6; else if (r % 1e3 == 0) printf "%dk", r / 1e3; else printf "%d", r }'; }

# --- plans --------------------------------------------------------------------------------

terms='['
for j in $(seq 1 19); do
  if ((j > 1)); then terms+=', '; fi
  terms+="{\"name\": \"x$j\", \"column\": \"x$j\"}"
done
terms+=']'
printf '{"response": "y", "intercept": true, "terms": %s, "method": "none"}\n' "$terms" >"$work/fit_plan.json"
printf '{"response": "y", "intercept": true, "terms": %s, "method": "stepwise", "criterion": "bic"}\n' "$terms" >"$work/select_plan.json"

declare -A threads_ok
for command in profile fit select predict; do
  if has_threads_option "$command"; then threads_ok[$command]=1; else threads_ok[$command]=0; fi
done
thread_args=()
set_thread_args() {  # command threads -> thread_args, the arguments to pass
  thread_args=()
  if [[ "${threads_ok[$1]}" == 1 ]]; then thread_args=(--threads "$2"); fi
}
threads_cell() {  # command threads -> the table's threads cell
  if [[ "${threads_ok[$1]}" == 1 ]]; then echo "$2"; else echo "$2 (no option)"; fi
}

# --- measuring ----------------------------------------------------------------------------

RUN_STDOUT="$work/stdout.txt"
size_index=0
for rows in $ROWS; do
  size_index=$((size_index + 1))
  threads_index=0
  label=$(rows_label "$rows")
  data="$work/data_$rows.csv"
  echo "scale_bench: generating $rows rows" >&2
  gen_start=$(date +%s%N)
  nice "$SCALE_GEN" "$rows" "$data"
  gen_end=$(date +%s%N)
  bytes=$(stat -c %s "$data")
  notes+=("$label rows: $(human_size "$bytes") of CSV, generated in $(awk -v a="$gen_start" -v b="$gen_end" 'BEGIN { printf "%.1f", (b - a) / 1e9 }') s")
  cat "$data" >/dev/null   # into the page cache, so that no command pays the disk for the others

  declare -A parse_seconds=() fit_seconds=() select_seconds=() predict_seconds=()
  first_threads=""
  for threads in $THREADS; do
    threads_index=$((threads_index + 1))
    first_threads="${first_threads:-$threads}"
    echo "scale_bench: $label rows, $threads thread(s)" >&2

    # profile: parse only.
    if [[ "${threads_ok[profile]}" == 0 && "$threads" != "$first_threads" ]]; then
      add_row '`profile` (parse only)' "$label" "$threads" n/a n/a n/a n/a "≥ 1.7× threads $first_threads" "n/a (no --threads)"
    else
      set_thread_args profile "$threads"
      run_measured nice "$STEPLEDGER" profile "$data" --json "${thread_args[@]}"
      parse_seconds[$threads]=$RUN_SECONDS
      goal="—"; met="—"
      if [[ "$threads" != "$first_threads" && -n "${parse_seconds[$first_threads]:-}" ]]; then
        speedup=$(ratio "${parse_seconds[$first_threads]}" "$RUN_SECONDS")
        goal="≥ 1.7× threads $first_threads"; met="$(verdict at_least "$speedup" 1.7) (${speedup}×)"
      fi
      ((RUN_OK)) || met="FAILED"
      add_row '`profile` (parse only)' "$label" "$(threads_cell profile "$threads")" "$RUN_SECONDS s" \
        "$(mb_per_s "$bytes" "$RUN_SECONDS")" "$(peak_mb "$RUN_PEAK_KB")" "$(human_size "$(stat -c %s "$RUN_STDOUT")") JSON" "$goal" "$met"
    fi

    # fit: the whole fit of the 19 terms.
    if [[ "${threads_ok[fit]}" == 0 && "$threads" != "$first_threads" ]]; then
      add_row '`fit`' "$label" "$threads" n/a n/a n/a n/a "≥ 1.7× threads $first_threads" "n/a (no --threads)"
    else
      set_thread_args fit "$threads"
      run_measured nice "$STEPLEDGER" fit "$data" --plan "$work/fit_plan.json" --json "${thread_args[@]}"
      fit_seconds[$threads]=$RUN_SECONDS
      if [[ "$threads" == "$first_threads" && "$RUN_OK" == 1 ]]; then cp "$RUN_STDOUT" "$work/fit_$rows.json"; fi
      parse_basis="${parse_seconds[$threads]:-${parse_seconds[$first_threads]:-}}"
      goal="≥ 0.5 × parse MB/s"; met="n/a"
      if [[ -n "$parse_basis" ]]; then
        share=$(ratio "$parse_basis" "$RUN_SECONDS")   # fit MB/s over parse MB/s
        met="$(verdict at_least "$share" 0.5) ($share)"
        if [[ -z "${parse_seconds[$threads]:-}" ]]; then met+=" vs parse at $first_threads thread(s)"; fi
      fi
      if [[ "$threads" != "$first_threads" ]]; then
        speedup=$(ratio "${fit_seconds[$first_threads]}" "$RUN_SECONDS")
        goal+="; ≥ 1.7× threads $first_threads"; met+="; $(verdict at_least "$speedup" 1.7) (${speedup}×)"
      fi
      ((RUN_OK)) || met="FAILED"
      add_row '`fit`' "$label" "$(threads_cell fit "$threads")" "$RUN_SECONDS s" \
        "$(mb_per_s "$bytes" "$RUN_SECONDS")" "$(peak_mb "$RUN_PEAK_KB")" "$(human_size "$(stat -c %s "$RUN_STDOUT")") JSON" "$goal" "$met"
    fi

    # select: stepwise by BIC over the 19 terms, audit and report written.
    if [[ "${threads_ok[select]}" == 0 && "$threads" != "$first_threads" ]]; then
      add_row '`select --out`' "$label" "$threads" n/a n/a n/a n/a "≥ 1.7× threads $first_threads" "n/a (no --threads)"
    else
      out_dir="$work/select_${rows}_$threads"
      set_thread_args select "$threads"
      RUN_CLEAN="$out_dir"
      run_measured nice "$STEPLEDGER" select "$data" --plan "$work/select_plan.json" --out "$out_dir" --json "${thread_args[@]}"
      select_seconds[$threads]=$RUN_SECONDS
      report_bytes=0
      if [[ -f "$out_dir/report.html" ]]; then report_bytes=$(stat -c %s "$out_dir/report.html"); fi
      if [[ "$threads" == "$first_threads" && "$RUN_OK" == 1 ]]; then
        cp "$out_dir/audit.json" "$work/audit_$rows.json"
        cp "$RUN_STDOUT" "$work/select_$rows.json"
      fi
      peak=$(peak_mb "$RUN_PEAK_KB")
      goal="peak < 200 MB; report < 3 MB"
      met="$(verdict below "$peak" 200); $(verdict below "$report_bytes" 3000000)"
      if [[ "$threads" != "$first_threads" ]]; then
        speedup=$(ratio "${select_seconds[$first_threads]}" "$RUN_SECONDS")
        goal+="; ≥ 1.7× threads $first_threads"; met+="; $(verdict at_least "$speedup" 1.7) (${speedup}×)"
      fi
      ((RUN_OK)) || met="FAILED"
      add_row '`select --out` (stepwise, BIC)' "$label" "$(threads_cell select "$threads")" "$RUN_SECONDS s" \
        "$(mb_per_s "$bytes" "$RUN_SECONDS")" "$peak" "report.html $(human_size "$report_bytes")" "$goal" "$met"
    fi

    # predict: prices every row with the selected model.
    if ((rows <= PREDICT_MAX_ROWS)) && [[ -f "$work/audit_$rows.json" ]]; then
      if [[ "${threads_ok[predict]}" == 0 && "$threads" != "$first_threads" ]]; then
        add_row '`predict --out`' "$label" "$threads" n/a n/a n/a n/a "peak < 100 MB; ≥ 1.7× threads $first_threads" "n/a (no --threads)"
      else
        predictions="$work/predictions_${rows}_$threads.csv"
        set_thread_args predict "$threads"
        RUN_CLEAN="$predictions"
        run_measured nice "$STEPLEDGER" predict "$work/audit_$rows.json" "$data" --out "$predictions" "${thread_args[@]}"
        predict_bytes=0
        if [[ -f "$predictions" ]]; then predict_bytes=$(stat -c %s "$predictions"); fi
        rm -f "$predictions"
        predict_seconds[$threads]=$RUN_SECONDS
        peak=$(peak_mb "$RUN_PEAK_KB")
        goal="peak < 100 MB"; met="$(verdict below "$peak" 100)"
        if [[ "$threads" != "$first_threads" && -n "${predict_seconds[$first_threads]:-}" ]]; then
          speedup=$(ratio "${predict_seconds[$first_threads]}" "$RUN_SECONDS")
          goal+="; ≥ 1.7× threads $first_threads"; met+="; $(verdict at_least "$speedup" 1.7) (${speedup}×)"
        fi
        ((RUN_OK)) || met="FAILED"
        add_row '`predict --out`' "$label" "$(threads_cell predict "$threads")" "$RUN_SECONDS s" \
          "$(mb_per_s "$bytes" "$RUN_SECONDS")" "$peak" "$(human_size "$predict_bytes") CSV" "$goal" "$met"
      fi
    fi
  done

  # The user's alternative: pandas.read_csv + numpy.linalg.lstsq with standard errors.
  echo "scale_bench: $label rows, pandas + numpy" >&2
  run_measured nice "$PYTHON" "$here/scale_bench_python.py" "$data" y
  python_seconds=$RUN_SECONDS
  if [[ "$RUN_OK" == 1 ]]; then cp "$RUN_STDOUT" "$work/python_$rows.json"; fi
  last_threads="${THREADS##* }"
  goal="\`fit\` at $last_threads threads ≥ 3× faster"; met="n/a"
  if [[ -n "${fit_seconds[$last_threads]:-}" ]]; then
    speedup=$(ratio "$python_seconds" "${fit_seconds[$last_threads]}")
    met="$(verdict at_least "$speedup" 3) (${speedup}×)"
  fi
  ((RUN_OK)) || met="FAILED"
  add_row 'pandas `read_csv` + numpy `lstsq`, SE' "$label" "(numpy default)" "$python_seconds s" \
    "$(mb_per_s "$bytes" "$python_seconds")" "$(peak_mb "$RUN_PEAK_KB")" "—" "$goal" "$met"

  # The benchmark measures the right thing only if both computed the same model.
  if [[ -f "$work/fit_$rows.json" && -f "$work/python_$rows.json" ]]; then
    if check=$("$PYTHON" - "$work/fit_$rows.json" "$work/python_$rows.json" "$work/select_$rows.json" <<'PY'
import json, sys
fit_result = json.load(open(sys.argv[1]))
fit = fit_result.get("model", fit_result)  # fit --json prints the model object itself
numpy_result = json.load(open(sys.argv[2]))
worst_estimate = worst_se = 0.0
for coefficient in fit["coefficients"]:
    name = coefficient["name"]
    reference_estimate = numpy_result["estimates"][name]
    reference_se = numpy_result["se"][name]
    worst_estimate = max(worst_estimate, abs(coefficient["estimate"] - reference_estimate) / max(abs(reference_estimate), reference_se))
    worst_se = max(worst_se, abs(coefficient["se"] - reference_se) / reference_se)
try:
    kept = json.load(open(sys.argv[3]))["model"]["terms"]
    kept_text = f"; `select` kept {len(kept)} terms: {', '.join(kept)} (true model: x1..x10)"
except (OSError, KeyError, ValueError):
    kept_text = ""
agree = worst_estimate < 1e-8 and worst_se < 1e-6
print(("agree" if agree else "DISAGREE") +
      f" (largest difference: estimates {worst_estimate:.1e} of max(|b|, SE), SE {worst_se:.1e} relative){kept_text}")
sys.exit(0 if agree else 1)
PY
    ); then
      notes+=("$label rows: \`fit\` and numpy $check")
    else
      status=1
      notes+=("$label rows: \`fit\` and numpy ${check:-could not be compared}")
    fi
  fi
  if [[ "${KEEP:-0}" != 1 ]]; then rm -f "$data"; fi   # the next size needs the disk space
done

# --- the table ----------------------------------------------------------------------------

cpu_model=$(awk -F': *' '/^model name/ { print $2; exit }' /proc/cpuinfo)
memory_gb=$(awk '/^MemTotal/ { printf "%.1f", $2 * 1024 / 1e9 }' /proc/meminfo)
versions=$("$PYTHON" -c 'import numpy, pandas, platform; print(f"Python {platform.python_version()}, pandas {pandas.__version__}, numpy {numpy.__version__}")')
commit=$(git -C "$repo" rev-parse --short HEAD 2>/dev/null || echo unknown)

echo "## Scale benchmark"
echo
echo "- Machine: $(nproc) cores available ($(grep -c '^processor' /proc/cpuinfo) online), CPU: ${cpu_model:-unknown}, memory ${memory_gb} GB"
echo "- Load average at the end (1, 5, 15 min): $(cut -d' ' -f1-3 /proc/loadavg)"
echo "- stepledger $commit (Release build in $(basename "$BUILD_DIR")), $versions; $(date -u +%Y-%m-%dT%H:%MZ)"
echo "- Data: y and x1..x19 from a known linear model (bench/scale_gen.cpp), 9 significant digits"
echo "- \`--threads\` listed by \`--help\` of: $(for c in profile fit select predict; do if [[ "${threads_ok[$c]}" == 1 ]]; then printf '`%s` ' "$c"; fi; done)"
echo
echo "| command | rows | threads | time | MB/s | peak MB | output | goal | met? |"
echo "| --- | ---: | ---: | ---: | ---: | ---: | ---: | --- | --- |"
printf '%s\n' "${rows_table[@]}" | sort -t $'\t' -k1,1n -k2,2n -k3,3n -s | cut -f4-
echo
for note in "${notes[@]}"; do echo "- $note"; done
echo "- MB = 10^6 bytes; MB/s = CSV size / wall time; peak = largest resident set (/usr/bin/time %M); time = fastest of $REPEAT run(s), peak = largest; warm page cache"
exit "$status"
