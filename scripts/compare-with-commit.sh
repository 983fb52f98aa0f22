#!/usr/bin/env bash
# Compares the library in this working tree ("new") with the library at an older commit ("old") on Fashion-MNIST:
# build time, single-query and batch searches per second, each with its recall@10, for the exact, inverted-file and
# graph indexes (benchmarks/VectorKit.Compare).
#
# The old commit is checked out in a temporary git worktree, the Compare project is copied into it so the same
# harness source is compiled against the old library, both are built in Release, and the two builds then run
# alternately (old, new, old, new, ...) for several rounds so that load on the machine falls on both alike. Each
# process prints medians of its own repetitions; the table gives the median over rounds of each version, the ratio
# new/old (below 1: the new code is slower), the range of the per-round ratios as a view of the noise, and the recall of
# each version beside each speed.
#
# usage: scripts/compare-with-commit.sh [-r ROUNDS] [-o RAW.tsv] COMMIT [-- HARNESS OPTIONS...]
#   -r ROUNDS   old/new pairs to run (default 3)
#   -o FILE     also keep the raw measurement lines (version, round, kind, measure, value)
#   HARNESS OPTIONS go to every run, e.g. -- --kinds graph --reps 3 (see Program.cs / CompareSettings.cs)
# The data set is read from /usr/share/datasets/fashion-mnist (Debian's dataset-fashion-mnist) or $VECTORKIT_FASHION_MNIST.
set -euo pipefail

usage() { sed -n '/^# usage:/,/^# The data set/p' "$0" | sed 's/^# \{0,1\}//' >&2; exit 2; }

rounds=3
raw=""
while getopts "r:o:h" opt; do
  case "$opt" in
    r) rounds="$OPTARG" ;;
    o) raw="$OPTARG" ;;
    *) usage ;;
  esac
done
shift $((OPTIND - 1))
[ $# -ge 1 ] || usage
commit="$1"; shift
if [ "${1:-}" = "--" ]; then shift; fi
harness_args=("$@")
case "$rounds" in ''|*[!0-9]*|0) echo "error: -r needs a positive number of rounds, got '$rounds'" >&2; exit 2 ;; esac

root="$(cd "$(dirname "$0")/.." && pwd)"
old_sha="$(git -C "$root" rev-parse --verify --quiet "$commit^{commit}")" || { echo "error: '$commit' is not a commit" >&2; exit 2; }
new_desc="$(git -C "$root" rev-parse --short HEAD)$(git -C "$root" diff --quiet HEAD -- src benchmarks/VectorKit.Compare || echo '+changes')"

work="$(mktemp -d)"
old_tree="$work/old"
cleanup() {
  git -C "$root" worktree remove --force "$old_tree" >/dev/null 2>&1 || true
  git -C "$root" worktree prune >/dev/null 2>&1 || true
  rm -rf "$work"
}
trap cleanup EXIT

git -C "$root" worktree add --detach --quiet "$old_tree" "$old_sha"
rm -rf "$old_tree/benchmarks/VectorKit.Compare"
mkdir -p "$old_tree/benchmarks/VectorKit.Compare"
cp "$root"/benchmarks/VectorKit.Compare/*.cs "$root"/benchmarks/VectorKit.Compare/*.csproj "$old_tree/benchmarks/VectorKit.Compare/"

# One build node and no compiler server: nothing is left running afterwards, and the load on a shared machine stays low.
build() { # tree, output copy
  dotnet build "$1/benchmarks/VectorKit.Compare/VectorKit.Compare.csproj" -c Release -nologo -v:q \
    -m:1 -nodeReuse:false -p:UseSharedCompilation=false >"$work/build.log" 2>&1 \
    || { cat "$work/build.log" >&2; echo "error: build of $1 failed" >&2; exit 1; }
  # Run from a copy, so a rebuild of the tree during the comparison cannot mix two versions.
  cp -r "$1/benchmarks/VectorKit.Compare/bin/Release/net10.0" "$2"
}
echo "building old ($(git -C "$root" rev-parse --short "$old_sha")) and new ($new_desc) in Release ..." >&2
build "$old_tree" "$work/run-old"
build "$root" "$work/run-new"

results="$work/results.tsv"
: >"$results"
started=$SECONDS
for ((round = 1; round <= rounds; round++)); do
  for version in old new; do
    t0=$SECONDS
    printf 'round %d/%d: %s ... ' "$round" "$rounds" "$version" >&2
    if ! dotnet "$work/run-$version/VectorKit.Compare.dll" --label "$version" --round "$round" ${harness_args[@]+"${harness_args[@]}"} \
        >>"$results" 2>"$work/run.log"; then
      echo "failed" >&2; tail -n 30 "$work/run.log" >&2; exit 1
    fi
    echo "$((SECONDS - t0)) s (load average $(cut -d' ' -f1-3 /proc/loadavg 2>/dev/null || echo '?'))" >&2
  done
done

echo
echo "old = $(git -C "$root" log -1 --format='%h %s' "$old_sha" | cut -c1-100)"
echo "new = $new_desc (this working tree)"
echo "machine: $(nproc) cores, .NET $(dotnet --version), $rounds round(s) in $(((SECONDS - started) / 60)) min, harness options: ${harness_args[*]:-(defaults)}"
echo
dotnet "$work/run-new/VectorKit.Compare.dll" summarize --base old --test new "$results"
if [ -n "$raw" ]; then cp "$results" "$raw"; echo "raw lines: $raw" >&2; fi
