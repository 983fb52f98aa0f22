#!/usr/bin/env bash
# The full-size runs of the Orleans package that CI keeps smaller: the scale test with its graph part at 10^5 items
# (4 silos, S = 8, R = 2; CI runs the graph part at 20,000), the loopback load test of the HTTP sample at 32 clients
# for 20 s, and the fan-out benchmark (exact 10^5 × 32 and graph 10^5 × 32). Tens of minutes on a shared 2-core
# machine. Takes no arguments; prints every figure.
set -euo pipefail
cd "$(dirname "$0")/.."

nice -n 10 dotnet build tests/VectorKit.Orleans.Tests -c Release
VECTORKIT_ORLEANS_FULL=1 nice -n 10 dotnet test tests/VectorKit.Orleans.Tests -c Release --no-build \
  --filter "FullyQualifiedName~ScaleTests" --logger "console;verbosity=detailed"
nice -n 10 dotnet run -c Release --project samples/ShardedSearch -- load-test 32 20
nice -n 10 dotnet run -c Release --project benchmarks/VectorKit.Orleans.Benchmarks -- fan-out 100000 32 10 exact 8
nice -n 10 dotnet run -c Release --project benchmarks/VectorKit.Orleans.Benchmarks -- fan-out 100000 32 10 graph 8
