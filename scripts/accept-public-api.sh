#!/usr/bin/env bash
# Rewrites tests/VectorKit.PublicApi.Tests/VectorKit.approved.txt from the current library: run it after an
# intended change to the public API, then review the file's diff and commit it with the change.
# Extra arguments go to `dotnet test`.
set -euo pipefail
cd "$(dirname "$0")/.."
VECTORKIT_ACCEPT_API=1 dotnet test tests/VectorKit.PublicApi.Tests -c Release \
  --filter "FullyQualifiedName~PublicApiBaselineTests" "$@"
