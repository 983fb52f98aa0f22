#!/usr/bin/env bash
# The exact index's batch search against the numpy + OpenBLAS baseline, side by side on Fashion-MNIST:
# alternating rounds of scripts/numpy-baseline.sh (one repetition) and the harness `exact-batch-vs-blas` (one
# repetition), each round on the same data, so a loaded machine slows both alike. The harness checks its answers
# against the index's single-query search and against the baseline's top-10 ids of the same round.
# Usage: scripts/compare-batch-with-blas.sh [rounds (default 3)] [reference queries (default 100)]
set -euo pipefail
cd "$(dirname "$0")/.."
rounds="${1:-3}"
reference="${2:-100}"
ids="$(mktemp)"
trap 'rm -f "$ids"' EXIT

dotnet build benchmarks/VectorKit.Benchmarks -c Release -v quiet -nologo >/dev/null
harness=benchmarks/VectorKit.Benchmarks/bin/Release/net10.0/VectorKit.Benchmarks.dll
for round in $(seq 1 "$rounds"); do
  echo "== round $round: numpy + OpenBLAS"
  nice -n 10 scripts/numpy-baseline.sh --repeat 1 --out "$ids"
  echo "== round $round: VectorKit"
  nice -n 10 dotnet "$harness" exact-batch-vs-blas 1 "$reference" "$ids"
done
