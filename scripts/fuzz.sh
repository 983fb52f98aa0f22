#!/usr/bin/env bash
# Runs one coverage-guided fuzzing campaign with afl++ and SharpFuzz (see docs/fuzzing.md).
#
#   scripts/fuzz.sh <target> <seconds>        e.g. scripts/fuzz.sh index 1800
#   scripts/fuzz.sh list                      the targets
#
# Installs afl++ (Debian's afl++ package) and the SharpFuzz.CommandLine tool when missing, publishes the harness
# (fuzz/VectorKit.Fuzz) twice, instruments VectorKit.dll in one copy, seeds the corpus (the harness's generated seeds
# plus the committed fuzz/corpus/<target>), runs one afl-fuzz instance at nice 19 for <seconds>, then prints the
# executions, corpus, crashes, hangs and the largest per-input allocation (measured by replaying every queue, crash
# and hang input through the uninstrumented copy), and minimises the queue with afl-cmin.
#
# Environment: FUZZ_WORK (default ~/.cache/vectorkit-fuzz; afl-cmin refuses /tmp) holds the builds and afl's
# output, kept between runs; FUZZ_TIMEOUT_MS (default 5000) is afl's per-input time limit; FUZZ_UPDATE_CORPUS=1 copies
# the minimised corpus (surviving seeds first, then the smallest inputs, up to FUZZ_CORPUS_BUDGET_KB: default 96 for
# index, 24 for the others) and every crash and hang into fuzz/corpus/<target>/. The harness counts an input that
# allocates more than FuzzTargets.AllocationCap (VECTORKIT_FUZZ_MAX_ALLOC_MB replaces its fixed part) as a crash.
set -euo pipefail
cd "$(dirname "$0")/.."
repo="$(pwd)"
export DOTNET_CLI_TELEMETRY_OPTOUT=1 DOTNET_NOLOGO=1

work="${FUZZ_WORK:-${XDG_CACHE_HOME:-$HOME/.cache}/vectorkit-fuzz}"
timeout_ms="${FUZZ_TIMEOUT_MS:-5000}"
sharpfuzz_version=2.3.0

publish() { # folder
  rm -rf "$1"
  dotnet publish fuzz/VectorKit.Fuzz -c Release -o "$1" --nologo -v q >"$work/publish.log" 2>&1 || { cat "$work/publish.log"; exit 1; }
}

mkdir -p "$work"
if [ "${1:-}" = list ] || [ $# -lt 2 ]; then
  [ "${1:-}" = list ] || echo "usage: scripts/fuzz.sh <target> <seconds>   (targets below)" >&2
  publish "$work/plain"
  dotnet "$work/plain/VectorKit.Fuzz.dll" list
  [ "${1:-}" = list ]
  exit
fi
target="$1"
seconds="$2"

# --- tools ------------------------------------------------------------------------------------------------------
if ! command -v afl-fuzz >/dev/null 2>&1; then
  if [ "$(id -u)" = 0 ]; then
    apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq afl++
  else
    sudo apt-get update -qq && sudo DEBIAN_FRONTEND=noninteractive apt-get install -y -qq afl++
  fi
fi
tools="$repo/fuzz/.tools"
if [ ! -x "$tools/sharpfuzz" ]; then
  dotnet tool install --tool-path "$tools" SharpFuzz.CommandLine --version "$sharpfuzz_version"
fi

# --- builds: one instrumented for afl, one plain for replaying and measuring --------------------------------------
publish "$work/plain"
dotnet "$work/plain/VectorKit.Fuzz.dll" list | grep -qx "$target" || { echo "unknown target '$target'" >&2; dotnet "$work/plain/VectorKit.Fuzz.dll" list >&2; exit 2; }
publish "$work/afl"
"$tools/sharpfuzz" "$work/afl/VectorKit.dll"

# --- seeds ----------------------------------------------------------------------------------------------------------
rm -rf "$work/seeds" "$work/in/$target"
dotnet "$work/plain/VectorKit.Fuzz.dll" seeds "$work/seeds"
mkdir -p "$work/in/$target"
cp "$work/seeds/$target"/* "$work/in/$target/"
if [ -d "fuzz/corpus/$target" ]; then
  find "fuzz/corpus/$target" -type f ! -name README.txt -exec cp {} "$work/in/$target/" \;
fi

# --- campaign -------------------------------------------------------------------------------------------------------
# The target is `dotnet`, which afl cannot check for instrumentation (SharpFuzz's forkserver reports the coverage).
export AFL_SKIP_BIN_CHECK=1 AFL_SKIP_CPUFREQ=1 AFL_I_DONT_CARE_ABOUT_MISSING_CRASHES=1 AFL_NO_UI=1 AFL_NO_AFFINITY=1
out="$work/out/$target"
rm -rf "$out"; mkdir -p "$work/out"
started="$(date -u +%Y-%m-%dT%H:%MZ)"
echo "== afl-fuzz $target for $seconds s (started $started; log $work/afl-$target.log)"
nice -n 19 afl-fuzz -i "$work/in/$target" -o "$out" -t "$timeout_ms" -m none -V "$seconds" \
  -- dotnet "$work/afl/VectorKit.Fuzz.dll" "$target" >"$work/afl-$target.log" 2>&1 || { tail -40 "$work/afl-$target.log"; exit 1; }

stats="$out/default/fuzzer_stats"
stat() { awk -v k="$1" '$1 == k { print $3 }' "$stats"; }
crashes=$(find "$out/default/crashes" -type f -name 'id:*' | wc -l)
hangs=$(find "$out/default/hangs" -type f -name 'id:*' | wc -l)

# --- largest allocation: replay every input the campaign kept through the plain build -------------------------------
measure="$work/measure-$target.log"
dotnet "$work/plain/VectorKit.Fuzz.dll" "$target" --replay "$out/default/queue" "$out/default/crashes" "$out/default/hangs" >"$measure" 2>&1 || true

# --- minimised corpus -----------------------------------------------------------------------------------------------
min="$work/min/$target"
rm -rf "$min"
nice -n 19 afl-cmin -i "$out/default/queue" -o "$min" -t "$timeout_ms" -m none -- "$(command -v dotnet)" "$work/afl/VectorKit.Fuzz.dll" "$target" >"$work/cmin-$target.log" 2>&1 || true
min_count=$(find "$min" -type f 2>/dev/null | wc -l || true)
[ "$min_count" -gt 0 ] || { echo "afl-cmin failed (see $work/cmin-$target.log); keeping the whole queue"; mkdir -p "$min"; find "$out/default/queue" -maxdepth 1 -type f -exec cp {} "$min/" \; ; }

echo "== $target: campaign of $(stat run_time) s started $started"
echo "command:    nice -n 19 afl-fuzz -i <seeds> -o <out> -t $timeout_ms -m none -V $seconds -- dotnet VectorKit.Fuzz.dll $target"
echo "executions: $(stat execs_done) ($(stat execs_per_sec)/s), stability $(stat stability)"
echo "corpus:     $(stat corpus_count) inputs ($(stat corpus_found) found by afl), coverage $(stat bitmap_cvg), minimised to $min_count"
echo "crashes:    $crashes    hangs: $hangs    (in $out/default)"
grep -E "^(replay|largest)" "$measure" || tail -5 "$measure"
grep -E "^(FINDING|HANG)" "$measure" | cut -c1-400 || true

if [ "${FUZZ_UPDATE_CORPUS:-0}" = 1 ]; then
  dest="fuzz/corpus/$target"
  mkdir -p "$dest"
  case "$target" in index) default_kb=96 ;; *) default_kb=24 ;; esac
  budget=$(( ${FUZZ_CORPUS_BUDGET_KB:-$default_kb} * 1024 ))
  used=$(find "$dest" -type f -printf '%s\n' | awk '{ s += $1 } END { print s + 0 }')
  # The seeds that survived minimisation first (valid files of every kind), then the smallest; named by content.
  while read -r size file; do
    name="$dest/$(sha1sum "$file" | cut -c1-16)"
    [ -e "$name" ] && continue
    [ $(( used + size )) -gt "$budget" ] && continue
    cp "$file" "$name"; used=$(( used + size ))
  done < <(find "$min" -type f -name '*orig:*' -printf '%s %p\n' | sort -n; find "$min" -type f ! -name '*orig:*' -printf '%s %p\n' | sort -n)
  for kind in crashes hangs; do
    find "$out/default/$kind" -type f -name 'id:*' -print0 | while IFS= read -r -d '' file; do
      cp "$file" "$dest/${kind%s}-$(sha1sum "$file" | cut -c1-16)"
    done
  done
  echo "corpus:     fuzz/corpus/$target now $(find "$dest" -type f | wc -l) files, $(du -sk --apparent-size "$dest" | cut -f1) KiB"
fi
