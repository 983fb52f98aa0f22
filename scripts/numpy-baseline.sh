#!/usr/bin/env bash
# The general-purpose baseline for the exact index's batch search: numpy + OpenBLAS on Fashion-MNIST
# (benchmarks/baselines/exact_knn_numpy.py). Installs Debian's python3-numpy and libopenblas0-pthread when missing,
# then runs with OPENBLAS_CORETYPE and OPENBLAS_L2_SIZE unset for that command only, so OpenBLAS picks its kernel
# from the CPU itself, on THREADS threads (default 2).
# Usage: scripts/numpy-baseline.sh [script options, e.g. --out top10.i32 --repeat 3]
set -euo pipefail
cd "$(dirname "$0")/.."

missing=()
for package in python3-numpy libopenblas0-pthread; do
  dpkg-query -W -f='${Status}' "$package" 2>/dev/null | grep -q "install ok installed" || missing+=("$package")
done
if [ ${#missing[@]} -gt 0 ]; then
  sudo_cmd=()
  [ "$(id -u)" = 0 ] || sudo_cmd=(sudo)
  "${sudo_cmd[@]}" apt-get update -qq
  "${sudo_cmd[@]}" env DEBIAN_FRONTEND=noninteractive apt-get install -y -qq "${missing[@]}"
fi

# Debian's numpy, not one from another Python on PATH.
exec env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE OPENBLAS_NUM_THREADS="${THREADS:-2}" \
  /usr/bin/python3 benchmarks/baselines/exact_knn_numpy.py "$@"
