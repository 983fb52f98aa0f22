#!/usr/bin/env bash
# Tool smoke test: packs the command-line tool (src/VectorKit.Cli, package VectorKit.Cli) into a temporary feed,
# installs it with `dotnet tool install --tool-path` from that feed, and runs `vectorkit demo` the way the README
# shows it (Fashion-MNIST when installed, else the generated co-op catalogue; `--generated-catalogue` as the first
# argument forces the latter). Checks the exit code, the demo's numbered steps, recall@10 against exact search
# (at least 0.95), and that both PNGs were written and are PNGs; then that a bad argument exits with code 2.
# Prints "tool ok: ..." and exits non-zero on any failure; removes its temporary directory either way.
# About two minutes on 2 cores (the private package cache restores the tool's dependencies again).
set -euo pipefail
repo="$(cd "$(dirname "$0")/.." && pwd)"

work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
case "$work/" in
  "$repo"/*) echo "check-tool: the temporary directory $work is inside the repository; set TMPDIR elsewhere" >&2; exit 1 ;;
esac
feed="$work/feed"
tools="$work/tools"
# A private package cache, so the freshly packed tool is installed even when the same version is cached already.
export NUGET_PACKAGES="$work/packages"
export DOTNET_CLI_TELEMETRY_OPTOUT=1 DOTNET_NOLOGO=1 DOTNET_SKIP_FIRST_TIME_EXPERIENCE=1

echo "== pack"
dotnet pack "$repo/src/VectorKit.Cli" -c Release -o "$feed" --nologo -v quiet
shopt -s nullglob
packages=("$feed"/VectorKit.Cli.*.nupkg)
shopt -u nullglob
if [ "${#packages[@]}" -ne 1 ]; then
  echo "check-tool: expected one VectorKit.Cli package in the feed, found: $(ls "$feed")" >&2
  exit 1
fi
version="$(basename "${packages[0]}" .nupkg)"
version="${version#VectorKit.Cli.}"

echo "== install VectorKit.Cli $version"
dotnet tool install VectorKit.Cli --version "$version" --tool-path "$tools" --add-source "$feed"
vectorkit="$tools/vectorkit"
[ -x "$vectorkit" ] || { echo "check-tool: the install did not create $vectorkit" >&2; exit 1; }

echo "== vectorkit demo $*"
demo="$work/demo"
set +e
"$vectorkit" demo --folder "$demo" "$@" >"$work/demo.out" 2>"$work/demo.err"
code=$?
set -e
cat "$work/demo.out"
if [ "$code" -ne 0 ]; then
  echo "check-tool: vectorkit demo exited with $code:" >&2
  cat "$work/demo.err" >&2
  exit 1
fi
for step in "1. built a graph index" "2. searched the top 10" "3. recall@10 against exact search" "4. plots:"; do
  grep -q "^$step" "$work/demo.out" || { echo "check-tool: the demo did not print '$step'" >&2; exit 1; }
done
recall="$(sed -n 's/^3\. recall@10 against exact search on the first [0-9,]* queries: \([0-9.]*\) .*/\1/p' "$work/demo.out")"
awk -v r="$recall" 'BEGIN { exit !(r != "" && r >= 0.95 && r <= 1) }' || { echo "check-tool: recall@10 '$recall' is not in [0.95, 1]" >&2; exit 1; }
for png in recall-curves.png recall-histogram.png; do
  [ -s "$demo/$png" ] || { echo "check-tool: $png was not written" >&2; exit 1; }
  [ "$(head -c 4 "$demo/$png" | od -An -tx1 | tr -d ' \n')" = "89504e47" ] || { echo "check-tool: $png is not a PNG" >&2; exit 1; }
done
[ -s "$demo/neighbours.ivecs" ] || { echo "check-tool: neighbours.ivecs was not written" >&2; exit 1; }

echo "== a bad argument"
set +e
"$vectorkit" search --queries q.fvecs --output out.ivecs --k 0 >/dev/null 2>"$work/bad.err"
code=$?
set -e
[ "$code" -eq 2 ] || { echo "check-tool: a bad argument exited with $code, expected 2" >&2; cat "$work/bad.err" >&2; exit 1; }

echo "tool ok: VectorKit.Cli $version installed with dotnet tool install; demo recall@10 $recall; plots and results written"
