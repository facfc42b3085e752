#!/usr/bin/env bash
# Installs the built tree into a temporary prefix, then configures, builds and runs separate
# projects that find it with find_package(stepledger):
#   1. tests/install/consumer: a selection on an in-memory factor;
#   2. examples/api: the example program, run on the bundled demo data with the stepwise BIC
#      plan; its chosen terms must be the demo data's true model (examples/laptop_listings.h,
#      kLaptopTrueTerms: invented data whose true model the test knows);
#   3. the Python package (when built), imported from the prefix alone.
set -euo pipefail
build_dir="$1"
source_dir="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
repo_dir="$(cd "$source_dir/../.." && pwd)"
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
cmake --install "$build_dir" --prefix "$work/prefix" >/dev/null

# The consumers are built as the libraries were: same compiler and, for a sanitizer build
# (scripts/sanitize.sh, STEPLEDGER_SANITIZE), the same sanitizers, whose runtime every program
# that links instrumented libraries needs.
cache_value() { sed -n "s/^$1:[A-Z]*=//p" "$build_dir/CMakeCache.txt"; }
consumer_flags=(-DCMAKE_CXX_COMPILER="$(cache_value CMAKE_CXX_COMPILER)" -DCMAKE_BUILD_TYPE=Release)
if [[ "$(cache_value STEPLEDGER_SANITIZE)" == ON ]]; then
  consumer_flags+=(-DCMAKE_CXX_FLAGS="-fsanitize=address,undefined -fno-sanitize-recover=undefined -fno-omit-frame-pointer"
                   -DCMAKE_EXE_LINKER_FLAGS="-fsanitize=address,undefined")
fi

cmake -S "$source_dir/consumer" -B "$work/build" -DCMAKE_PREFIX_PATH="$work/prefix" \
  "${consumer_flags[@]}" >/dev/null
cmake --build "$work/build" >/dev/null
"$work/build/consumer"

cmake -S "$repo_dir/examples/api" -B "$work/build-api" -DCMAKE_PREFIX_PATH="$work/prefix" \
  "${consumer_flags[@]}" >/dev/null
cmake --build "$work/build-api" >/dev/null
output="$(OPENBLAS_NUM_THREADS=1 "$work/build-api/select_with_library" \
  "$repo_dir/examples/data/laptops.csv" "$repo_dir/examples/plans/stepwise_bic.json")"
echo "$output"
chosen="$(grep '^chosen terms:' <<<"$output" | sed 's/^chosen terms://' | tr ' ' '\n' | sed '/^$/d' | sort | tr '\n' ' ')"
expected="$(printf '%s\n' age 'age^2' battery memory log_storage screen cpu grade 'age:grade' warranty | sort | tr '\n' ' ')"
if [[ "$chosen" != "$expected" ]]; then
  echo "examples/api: chose [$chosen], expected the true model [$expected]" >&2
  exit 1
fi
grep -q '^Final model' <<<"$output" || { echo "examples/api: no final model printed" >&2; exit 1; }
echo "examples/api: recovered the true model"

# 3. The Python package, when the build made it (STEPLEDGER_BUILD_PYTHON): imported from the prefix
#    by the path README "Python module" names, with nothing from the build tree on the path.
python_dir="$(cache_value STEPLEDGER_PYTHON_INSTALL_DIR)"
if [[ -n "$python_dir" && -f "$build_dir/python/stepledger/__init__.py" ]]; then
  python="$(cache_value STEPLEDGER_PYTHON_EXECUTABLE)"
  PYTHONPATH="$work/prefix/$python_dir" "$python" -c "
import stepledger, sys
assert stepledger.__file__.startswith('$work/prefix/'), stepledger.__file__
result = stepledger.select('$repo_dir/examples/data/laptops.csv', '$repo_dir/examples/plans/stepwise_bic.json', threads=1)
print('python: chose', ' '.join(result.terms))
"
fi
