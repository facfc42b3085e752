#!/usr/bin/env bash
# Builds stepledger, then runs its demo: the invented data set of a reseller of refurbished
# laptops (true model in examples/laptop_listings.h) written into build/demo, stepwise selection
# by BIC on it, the audit (and report) beside the data, and the next commands to try.
#   bash scripts/demo.sh            # output in build/demo (replaced on every run)
#   DEMO_DIR=/tmp/d bash scripts/demo.sh
set -euo pipefail
root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
bash "$root/scripts/build.sh"
out="${DEMO_DIR:-$root/build/demo}"
echo
exec "$root/build/cli/stepledger" demo --out "$out" --force
