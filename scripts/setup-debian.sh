#!/usr/bin/env bash
# Installs the Debian 12 packages that building and testing stepledger need, only those
# that are missing. Quiet when everything is present.
#
#   --with-chromium   also install Debian's chromium, so that the report test renders the
#                     HTML report headless and checks the screenshot (skipped without it)
set -euo pipefail

with_chromium=0
for argument in "$@"; do
  case "$argument" in
    --with-chromium) with_chromium=1 ;;
    -h|--help) sed -n '2,6p' "$0" | sed 's/^# \{0,1\}//'; exit 0 ;;
    *) echo "setup-debian: unknown option '$argument' (see --help)" >&2; exit 2 ;;
  esac
done

packages=(
  cmake g++ make pkg-config
  libarmadillo-dev libopenblas-dev liblapack-dev
  nlohmann-json3-dev libspdlog-dev libgtest-dev libgmock-dev libcli11-dev
  libboost-math-dev libssl-dev zlib1g-dev libzstd-dev
  python3 python3-numpy python3-scipy python3-statsmodels python3-jsonschema
  # tests/audit/jws_interop_test.py: the audit's JWS signature against a general-purpose JOSE library
  python3-jwcrypto
  # python/: the Python module (pybind11 and Python's headers) and its pytest suite, a ctest
  # (pandas for data frames; a missing one fails the test rather than skipping it)
  pybind11-dev python3-pybind11 python3-dev python3-pytest python3-pandas
  # scripts/sanitize.sh and scripts/fuzz.sh: Clang, its sanitizer runtimes (only recommended by
  # clang, and recommendations are not installed here) and libFuzzer
  clang libclang-rt-14-dev libfuzzer-14-dev
  # cluster runs (mpirun -np K stepledger select ...; STEPLEDGER_WITH_MPI) and their test, cli.mpi_ranks
  openmpi-bin libopenmpi-dev
)
if [[ $with_chromium -eq 1 ]]; then
  packages+=(chromium)
fi

# One dpkg-query for all: packages it does not know are simply absent from its answer.
installed=$(dpkg-query -W -f='${Package} ${Status}\n' "${packages[@]}" 2>/dev/null || true)
missing=()
for package in "${packages[@]}"; do
  if ! grep -qx "$package install ok installed" <<<"$installed"; then
    missing+=("$package")
  fi
done

if [[ ${#missing[@]} -eq 0 ]]; then
  exit 0
fi

echo "setup-debian: installing ${missing[*]}"
if [[ $(id -u) -eq 0 ]]; then
  as_root=()
elif command -v sudo >/dev/null 2>&1; then
  as_root=(sudo)
else
  echo "setup-debian: missing packages (${missing[*]}) and neither root nor sudo; install them and rerun" >&2
  exit 1
fi
export DEBIAN_FRONTEND=noninteractive
"${as_root[@]}" env DEBIAN_FRONTEND=noninteractive apt-get update -qq
"${as_root[@]}" env DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends "${missing[@]}"
