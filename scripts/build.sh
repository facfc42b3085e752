#!/usr/bin/env bash
# Installs what is missing, configures and builds stepledger into build/.
# BUILD_TYPE=RelWithDebInfo bash scripts/build.sh for debug information (default Release).
set -euo pipefail
root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
bash "$root/scripts/setup-debian.sh"
cmake -S "$root" -B "$root/build" -DCMAKE_BUILD_TYPE="${BUILD_TYPE:-Release}" >/dev/null
cmake --build "$root/build" -j"$(nproc)"
