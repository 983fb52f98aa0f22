#!/usr/bin/env bash
# Native AOT check: installs what the native toolchain links with (Debian's clang and zlib1g-dev) when missing,
# publishes samples/NativeAot with native AOT, and fails on any trim or AOT warning (IL2xxx/IL3xxx) from any
# assembly, the library's included. Then runs the native binary and the same sample under the JIT, at the SIMD
# width the native binary runs at, and requires the same output line for line (result digests cover every id and
# distance bit), apart from the "timing:" and "runtime:" lines; it also checks key lines and known ids. Prints the
# publish time, the binary's size and both run times. Exits non-zero on any problem. Takes no arguments.
set -euo pipefail
repo="$(cd "$(dirname "$0")/.." && pwd)"
cd "$repo"
export DOTNET_CLI_TELEMETRY_OPTOUT=1 DOTNET_NOLOGO=1 DOTNET_SKIP_FIRST_TIME_EXPERIENCE=1

work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
sample=samples/NativeAot
case "$(uname -m)" in
  x86_64) rid=linux-x64 ;;
  aarch64) rid=linux-arm64 ;;
  *) echo "check-aot: no native AOT runtime identifier known for $(uname -m)" >&2; exit 1 ;;
esac
problems=0
fail() { echo "check-aot: $*" >&2; problems=$((problems + 1)); }

echo "== native toolchain (clang, zlib1g-dev)"
missing=()
for package in clang zlib1g-dev; do
  dpkg-query -W -f='${Status}' "$package" 2>/dev/null | grep -q 'install ok installed' || missing+=("$package")
done
if [ "${#missing[@]}" -gt 0 ]; then
  echo "installing ${missing[*]}"
  if [ "$(id -u)" = 0 ]; then
    apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq "${missing[@]}"
  elif command -v sudo >/dev/null 2>&1; then
    sudo apt-get update -qq && sudo DEBIAN_FRONTEND=noninteractive apt-get install -y -qq "${missing[@]}"
  else
    echo "check-aot: ${missing[*]} missing, and neither root nor sudo to install them" >&2
    exit 1
  fi
fi

echo "== publish with native AOT"
# The native compiler skips itself when its inputs look unchanged, and then prints no warnings: start it afresh.
rm -rf "$sample/obj/Release/net10.0/$rid/native"
start=$SECONDS
status=0
dotnet publish "$sample" -c Release -r "$rid" -o "$work/publish" --nologo </dev/null >"$work/publish.log" 2>&1 || status=$?
publish_seconds=$((SECONDS - start))
# Warnings are errors in this repository, so an IL2xxx/IL3xxx shows up as either; both count.
if grep -Eq '(warning|error) IL[23][0-9]{3}' "$work/publish.log"; then
  echo "check-aot: trim/AOT warnings in the publish:" >&2
  grep -E '(warning|error) IL[23][0-9]{3}' "$work/publish.log" | sort -u >&2
  problems=$((problems + 1))
fi
if [ "$status" != 0 ] || [ ! -x "$work/publish/NativeAot" ]; then
  tail -n 30 "$work/publish.log" >&2
  echo "check-aot: the publish failed (exit code $status)" >&2
  exit 1
fi
binary_bytes="$(stat -c %s "$work/publish/NativeAot")"
echo "published in $publish_seconds s; NativeAot binary $binary_bytes bytes ($((binary_bytes / 1024)) KiB)"

echo "== run the native binary"
start=$SECONDS
status=0
"$work/publish/NativeAot" </dev/null >"$work/native.log" 2>&1 || status=$?
echo "native run: exit code $status, $((SECONDS - start)) s (wall clock, one run)"
cat "$work/native.log"
[ "$status" = 0 ] || fail "the native binary exited with code $status"

# The JIT reference runs at the width the native binary chose (native AOT compiles for a baseline instruction set,
# x86-64-v2 on x64, unless IlcInstructionSet says otherwise), so every distance comes from the same kernel.
width="$(sed -nE 's/^widest SIMD: (Scalar|Vector128|Vector256|Vector512)$/\1/p' "$work/native.log")"
case "$width" in
  Vector512) switches=() ;;
  Vector256) switches=(DOTNET_EnableAVX512=0) ;;
  Vector128) switches=(DOTNET_EnableAVX2=0) ;;
  Scalar) switches=(DOTNET_EnableHWIntrinsic=0) ;;
  *) fail "the native binary printed no SIMD width"; switches=() ;;
esac

echo "== run the sample under the JIT${switches[*]:+ with ${switches[*]}}"
dotnet build "$sample" -c Release --nologo -v quiet </dev/null >"$work/build.log" 2>&1 || { cat "$work/build.log" >&2; exit 1; }
start=$SECONDS
status=0
env "${switches[@]}" dotnet "$sample/bin/Release/net10.0/NativeAot.dll" </dev/null >"$work/jit.log" 2>&1 || status=$?
echo "JIT run: exit code $status, $((SECONDS - start)) s (wall clock, one run)"
[ "$status" = 0 ] || { cat "$work/jit.log" >&2; fail "the JIT run exited with code $status"; }

grep -q '^runtime: native AOT$' "$work/native.log" || fail "the native binary does not say it runs as native AOT"
grep -q '^runtime: JIT$' "$work/jit.log" || fail "the JIT run does not say it runs under the JIT"
if ! diff <(grep -Ev '^(timing|runtime):' "$work/jit.log") <(grep -Ev '^(timing|runtime):' "$work/native.log") >"$work/diff"; then
  fail "the native output differs from the JIT run's (< JIT, > native):"
  cat "$work/diff" >&2
fi

# Key lines, so that a sample which stopped doing its job fails even when both runs agree.
log="$work/native.log"
need() { grep -Eq -- "$2" "$log" || fail "missing $1 (no line matching /$2/)"; }
refuse() { if grep -Eq -- "$2" "$log"; then fail "$1: $(grep -Em1 -- "$2" "$log")"; fi; }
# recall NAME LOW: the index's recall@10 against the exact index is at least LOW.
recall() {
  local v
  v="$(sed -nE "s/^$1: .*recall@10 ([0-9.]+), digest [0-9a-f]{16}$/\\1/p" "$log")"
  if [ -z "$v" ]; then fail "no result line for $1"; return; fi
  awk -v v="$v" -v lo="$2" 'BEGIN { exit !(v >= lo) }' || fail "$1: recall@10 = $v, expected at least $2"
}
need "the exact index's first answer (known ids)" '^  first query: #1039, #7655, #3513, #4608, #6815$'
recall "exact float32" 1
recall "exact 8-bit" 0.99
recall "graph float32" 0.98
recall "graph 8-bit" 0.98
recall "inverted file, product codes" 0.8
need "the filtered search keeping to items in stock" '^graph, first query, in stock only: (#[0-9]+, ){4}#[0-9]+; all in stock: yes$'
[ "$(grep -Ec '^loaded .*same answers: yes$' "$log")" = 4 ] || fail "not all four loaded indexes answer as the saved ones"
need "the re-ranking settings read back from JSON" '^re-ranking settings as JSON, read back equal: yes$'
need "the JSON's retrieval depth" '^    "RetrievalDepth": 60,$'
need "the re-ranked batch" '^re-ranked batch of 20: 1,200 pairs scored, digest [0-9a-f]{16}; first equals the single call: yes$'
refuse "a check answered NO" '(: |, )NO\b'

if [ "$problems" -gt 0 ]; then
  echo "check-aot: $problems problem(s) found" >&2
  exit 1
fi
echo "check-aot: native AOT publish without trim/AOT warnings; the native binary's output equals the JIT run's ($width)"
