#!/usr/bin/env bash
# Builds the stepledger program (only that target), then runs its demo from the repository
# root: the invented data set of a reseller of refurbished laptops (true model in
# examples/laptop_listings.h) written into build/demo, stepwise selection by BIC on it, the
# audit and report beside the data, and the next commands to try. Those lines, and the
# examples of every `--help`, run as printed from the repository root (the program as
# build/cli/stepledger unless a `stepledger` on PATH is that same program).
#   bash scripts/demo.sh            # output in build/demo (replaced on every run)
#   DEMO_DIR=/tmp/d bash scripts/demo.sh
set -euo pipefail
root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
bash "$root/scripts/setup-debian.sh"
cmake -S "$root" -B "$root/build" -DCMAKE_BUILD_TYPE="${BUILD_TYPE:-Release}" >/dev/null
cmake --build "$root/build" -j"$(nproc)" --target stepledger
cd "$root"
out="${DEMO_DIR:-build/demo}"
echo
exec build/cli/stepledger demo --out "$out" --force
