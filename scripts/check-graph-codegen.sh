#!/usr/bin/env bash
# Checks the code the JIT generates for the graph index under the runtime's default settings (tiered compilation with
# profile-guided recompilation): runs the clustered graph sweep with the 8-bit graph beside the float32 one, asks the
# runtime for the disassembly of every graph method (DOTNET_JitDisasm, DOTNET_JitStdOutFile), and fails when a tier-1
# body calls a distance-kernel helper (a lane operation, a metric step, the byte widening) or the node heap instead of
# inlining it: the sign of an inlining budget spent before the kernel, which once made the 8-bit walk 2.5–3× slower.
# Usage: scripts/check-graph-codegen.sh [count] [dimension]   (default 20000 × 64; a minute or two on 2 cores)
set -euo pipefail
repo="$(cd "$(dirname "$0")/.." && pwd)"
cd "$repo"
count="${1:-20000}"
dimension="${2:-64}"
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT

dotnet build benchmarks/VectorKit.Benchmarks -c Release -v quiet -nologo >/dev/null
DOTNET_JitDisasm='*Graph*:* *NodeHeap*:*' DOTNET_JitStdOutFile="$work/jit.txt" \
  dotnet benchmarks/VectorKit.Benchmarks/bin/Release/net10.0/VectorKit.Benchmarks.dll clustered-sweep "$count" "$dimension" with-8bit

tier1=$(grep -c '^; Tier1' "$work/jit.txt" || true)
calls=$(awk '/^; Assembly listing for method/ { name = $0; t1 = 0 }
  /^; Tier1 code|^; Tier1-OSR code/ { t1 = 1 }
  t1 && /call +\[VectorKit\.(Distance\.Kernels\.Lane|Distance\.Kernels\.[A-Za-z]*Step:Step|Quantization\.ByteCodeKernel:Widen|Indexes\.Graph\.NodeHeap:(Push|Pop))/ { print name; print "    " $0 }' "$work/jit.txt")
echo "check-graph-codegen: $tier1 tier-1 bodies of graph methods listed"
if [ "$tier1" -eq 0 ]; then
  echo "check-graph-codegen: no tier-1 body listed (did the run tier up?)" >&2
  exit 1
fi
if [ -n "$calls" ]; then
  echo "check-graph-codegen: kernel or heap helpers called instead of inlined:" >&2
  echo "$calls" >&2
  exit 1
fi
echo "check-graph-codegen: no tier-1 graph body calls a kernel or heap helper"
