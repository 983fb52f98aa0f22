#!/usr/bin/env bash
# Runs the whole test suite: installs the open data set the tests read (Fashion-MNIST, from Debian's
# dataset-fashion-mnist) when it is missing, runs every test, then re-runs the kernel tests with the wider SIMD
# instruction sets switched off so the 256-bit, 128-bit and scalar paths run on a machine that has wider ones
# (the exact, graph and inverted-file index tests too, and the product quantizer's ADC property: each picks its
# kernel width once per operation; the 8-bit code kernel tests are in the Kernels category).
# On .NET 10, DOTNET_EnableAVX512=0 turns Vector512 off; DOTNET_EnableAVX512F=0 alone does not.
# Extra arguments go to every `dotnet test` call.
set -euo pipefail
cd "$(dirname "$0")/.."

data_dir="${VECTORKIT_FASHION_MNIST:-/usr/share/datasets/fashion-mnist}"
if [ ! -f "$data_dir/train-images-idx3-ubyte.gz" ]; then
  if [ "$(id -u)" = 0 ]; then
    apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq dataset-fashion-mnist
  elif command -v sudo >/dev/null 2>&1; then
    sudo apt-get update -qq && sudo DEBIAN_FRONTEND=noninteractive apt-get install -y -qq dataset-fashion-mnist
  else
    echo "warning: Fashion-MNIST is not installed ($data_dir); data tests will be skipped (they fail when CI=true)." >&2
  fi
fi

results="$(mktemp -d)"
trap 'rm -rf "$results"' EXIT

run() { # label, then environment assignments, then test arguments
  local label="$1"; shift
  echo "== $label"
  env "$@" 2>&1 | tee "$results/$label.log"
}

run all dotnet test VectorKit.sln -c Release "$@"
filter="Category=Kernels|FullyQualifiedName~ExactIndexTests|FullyQualifiedName~GraphIndexTests|FullyQualifiedName~InvertedFileIndexTests|FullyQualifiedName~AdcDistance|FullyQualifiedName~Contract"
run avx2 DOTNET_EnableAVX512=0 VECTORKIT_EXPECT_PATH=Vector256 dotnet test tests/VectorKit.Tests -c Release --no-build --filter "$filter" "$@"
run sse DOTNET_EnableAVX2=0 VECTORKIT_EXPECT_PATH=Vector128 dotnet test tests/VectorKit.Tests -c Release --no-build --filter "$filter" "$@"
run scalar DOTNET_EnableHWIntrinsic=0 VECTORKIT_EXPECT_PATH=Scalar dotnet test tests/VectorKit.Tests -c Release --no-build --filter "$filter" "$@"

# Under CI a data test must run: a skip anywhere fails the run.
if [ "${CI:-}" = "true" ]; then
  if grep -hE "Skipped: +[1-9]|\[SKIP\]" "$results"/*.log; then
    echo "error: tests were skipped under CI=true (see above)." >&2
    exit 1
  fi
fi
