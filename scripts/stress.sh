#!/usr/bin/env bash
# The long concurrent stress run: the same code as the short ConcurrentStressTests round of the normal test run, with
# larger counts. Writers, readers and saves run together on every index kind and encoding and are checked against a
# sequential model (docs/live-updates.md, "Concurrent stress").
#
#   scripts/stress.sh [--minutes N | --operations N] [--seed S]
#
# --minutes N     rounds of 20,000 operations repeat, each with the next seed, until every variant has had N/8 minutes
#                 (the default: 10 minutes in all)
# --operations N  one round of about N operations per variant
# --seed S        the first round's seed (default 20261202); a failure names the seed of its round
# Runs at nice 10; the summary lines (operations, checks, failures per variant) are printed at the end.
set -euo pipefail
cd "$(dirname "$0")/.."

minutes="" operations="" seed=""
while [ $# -gt 0 ]; do
  case "$1" in
    --minutes) minutes="$2"; shift 2 ;;
    --operations) operations="$2"; shift 2 ;;
    --seed) seed="$2"; shift 2 ;;
    *) echo "usage: $0 [--minutes N | --operations N] [--seed S]" >&2; exit 2 ;;
  esac
done
if [ -n "$minutes" ] && [ -n "$operations" ]; then
  echo "error: give --minutes or --operations, not both" >&2; exit 2
fi
if [ -z "$minutes" ] && [ -z "$operations" ]; then minutes=10; fi

export VECTORKIT_STRESS_MINUTES="$minutes" VECTORKIT_STRESS_OPERATIONS="$operations" VECTORKIT_STRESS_SEED="$seed"
log="$(mktemp)"
trap 'rm -f "$log"' EXIT
status=0
nice -n 10 dotnet test tests/VectorKit.Tests -c Release --filter "FullyQualifiedName~ConcurrentStressTests" \
  --logger "console;verbosity=detailed" >"$log" 2>&1 || status=$?
grep -E "Error Message|^\s+\[[A-Za-z0-9]+, seed" "$log" | head -40 || true
grep -E "^\s+Concurrent stress " "$log" | sed 's/^ *//' | sort -u
grep -E "^(Passed|Failed)!|Total tests" "$log" || tail -20 "$log"
exit "$status"
