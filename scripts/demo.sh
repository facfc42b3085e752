#!/usr/bin/env bash
# Builds stepledger, then profiles and fits the bundled invented data set (a reseller of
# refurbished laptops; see examples/laptop_listings.h for its true model).
set -euo pipefail
root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
bash "$root/scripts/build.sh"
stepledger="$root/build/cli/stepledger"
cd "$root"
echo
echo "== stepledger profile examples/data/laptops.csv --response resale_price"
"$stepledger" profile examples/data/laptops.csv --response resale_price
echo
echo "== stepledger fit examples/data/laptops.csv --plan examples/plans/laptops_fit.json"
"$stepledger" fit examples/data/laptops.csv --plan examples/plans/laptops_fit.json
