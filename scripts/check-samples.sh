#!/usr/bin/env bash
# Runs the samples (QuickStart, Reranking, RentalSearch and ShardedSearch's demo) in Release and checks their output for the lines that show each
# sample did its job: results printed, numbers in their expected ranges, the loaded index answering as the saved
# one, live updates visible, one-based ranks, readable stage names. Prints every problem found and exits non-zero
# when there is one. Takes no arguments and no input.
set -euo pipefail
cd "$(dirname "$0")/.."

out="$(mktemp -d)"
trap 'rm -rf "$out"' EXIT
problems=0

fail() { echo "check-samples: $current: $*" >&2; problems=$((problems + 1)); }

# need DESCRIPTION REGEX: some output line matches the extended regular expression.
need() { grep -Eq -- "$2" "$log" || fail "missing $1 (no line matching /$2/)"; }

# refuse DESCRIPTION REGEX: no output line matches.
refuse() { if grep -Eq -- "$2" "$log"; then fail "$1: $(grep -Em1 -- "$2" "$log")"; fi; }

# value REGEX: the first capture of the first matching line (sed -E syntax), empty when absent.
value() { sed -nE "s/$1/\\1/p" "$log" | head -n1; }

# within DESCRIPTION VALUE LOW HIGH [open]: LOW <= VALUE <= HIGH, or LOW < VALUE < HIGH with "open".
within() {
  local what="$1" v="$2" lo="$3" hi="$4" open="${5:-}"
  if [ -z "$v" ]; then fail "$what: not printed"; return; fi
  if ! awk -v v="$v" -v lo="$lo" -v hi="$hi" -v open="$open" \
      'BEGIN { exit !(open == "open" ? (v > lo && v < hi) : (v >= lo && v <= hi)) }'; then
    if [ "$open" = open ]; then fail "$what = $v, expected in ($lo, $hi)"; else fail "$what = $v, expected in [$lo, $hi]"; fi
  fi
}

# hits HEADER_REGEX: the result lines ("  0.1234  #id ...") right after the first line matching the header.
hits() {
  awk -v header="$1" '
    found && /^ +-?[0-9]+\.[0-9]+ +#[0-9]+ / { print; next }
    found { exit }
    $0 ~ header { found = 1 }' "$log"
}

run() { # name, project directory, arguments for the sample
  current="$1"; log="$out/$1.log"
  echo "== $1"
  local start=$SECONDS status=0
  dotnet run -c Release --project "$2" -- "${@:3}" </dev/null 2>&1 | tee "$log" || status=$?
  echo "== $1: exit code $status, $((SECONDS - start)) s"
  [ "$status" = 0 ] || fail "exited with code $status"
}

run QuickStart samples/QuickStart
need "the build summary" '^Graph index \(default options\) built: 20,000 items'
need "build progress" '^  linked 20,000 of 20,000 items$'
[ "$(hits '^Search, k = 5:' | wc -l)" = 5 ] || fail "the k = 5 search did not print 5 results"
filtered="$(hits '^Filtered search, k = 5, only Water items in stock')"
[ "$(printf '%s\n' "$filtered" | grep -c 'Water, .*, in stock$')" = 5 ] \
  || fail "the filtered search did not print 5 Water items in stock: $filtered"
within "QuickStart recall@10 of the graph against the exact index" \
  "$(value '^Graph vs exact index, 1,000 queries: recall@10 = ([0-9.]+);.*')" 0.9 1.0 open
need "the line explaining recall" '^  \(of the true 10 nearest items, found by the exact index, the graph returned [0-9.]+ % on average\)$'
need "the loaded index answering as the saved one" '^Saved .* loaded in .*: 20,000 items; same answers as the saved index for all 1,000 queries: yes$'
added="$(value '^After Add of new #([0-9]+):$')"
if [ -z "$added" ]; then
  fail "missing the Add step"
else
  hits '^After Add of new #' | head -n1 | grep -q "#$added " || fail "the added item #$added is not the first result after Add"
  if hits '^After Remove of #' | grep -q "#$added "; then fail "the removed item #$added is still found after Remove"; fi
fi
refitted="$(value '^After AddOrReplace of #([0-9]+), .*\(replaced: True\):$')"
if [ -z "$refitted" ]; then
  fail "missing the AddOrReplace step replacing an existing item"
else
  hits '^After AddOrReplace of #' | grep -q "#$refitted .*Shelter, winter, ultralight" \
    || fail "the refitted item #$refitted is not found as a winter, ultralight tent after AddOrReplace"
fi
need "the item count after Remove" '^After Remove of #[0-9]+ \(20,000 items\):$'

run Reranking samples/Reranking
need "the build summary" '^Larchpass Outdoor Co-op re-ranking demo \(invented data\): 30,000 items'
refuse "the exhaustive stage's time is printed outside the calibration table" '^Scoring everything: .*[0-9] ms'
ranks="$(grep -Eo 'retrieval rank +[0-9]+' "$log" | awk '{ print $3 }')"
[ "$(printf '%s\n' "$ranks" | grep -c .)" = 10 ] || fail "expected 10 result lines with a retrieval rank"
[ "$(printf '%s\n' "$ranks" | sort -n | head -n1)" -ge 1 ] || fail "a retrieval rank below 1 (ranks are printed one-based)"
naive_ranks="$(awk '/^  Naive pruning/ { on = 1; next } on && /retrieval rank/ { print $5 } on && !/retrieval rank/ { exit }' "$log")"
[ -n "$naive_ranks" ] && [ "$(printf '%s\n' "$naive_ranks" | sort -n | tail -n1)" -le 10 ] \
  || fail "naive pruning (depth 10) shows a retrieval rank outside 1..10: $naive_ranks"
for stage in "scoring the whole collection" "tuning depths" "verifying on held-out"; do
  [ "$(grep -Ec "^  $stage.*\.\.\.$" "$log")" = 1 ] || fail "the progress line for \"$stage\" is not printed exactly once"
done
refuse "a raw stage name in progress" '^  (ExhaustiveScoring|Tuning|Verifying)\.\.\.$'
exhaustive_ms="$(value '^score everything +30000 +- +1\.000 +exact +30000 +([0-9.]+)$')"
within "the exhaustive scoring time per query (ms)" "$exhaustive_ms" 0 100000 open
need "the retrieval stage row" '^retrieval +[0-9]+ +[a-z0-9]+ +0\.[0-9]{3} +\[[0-9.]+, [0-9.]+\] +0 +[0-9.]+$'
need "the pairwise scoring stage row" '^pairwise scoring +10 +- +'
within "recall at depth 10 (naive pruning)" "$(value '^  depth +10: recall ([0-9.]+),.*')" 0 0.2
within "recall at depth 200" "$(value '^  depth +200: recall ([0-9.]+),.*')" 0.5 0.8
within "held-out recall of the calibrated settings" "$(value '.*; held-out recall ([0-9.]+) meets the target\..*')" 0.9 1.0
within "calibrated recall on the evaluation requests" \
  "$(value '^Calibrated settings on the 200 evaluation requests: recall ([0-9.]+) with .*')" 0.9 1.0
need "the settings as JSON" '^  "RetrievalDepth": [0-9]+,$'

run RentalSearch samples/RentalSearch
need "the build summary" '^Larchpass Outdoor Co-op rental search \(invented data\): 3,456 items embedded with all-MiniLM-L6-v2'
# Result lines: "  <score>  #<id> <rate>/day  <stock>  <description>".
rental_hits() {
  awk -v header="$1" '
    found && /^ +-?[0-9]+\.[0-9]+ +#[0-9]+ / { print; next }
    found { exit }
    index($0, header) == 1 { found = 1 }' "$log"
}
[ "$(rental_hits 'Semantic search "a light I can wear on my head"' | grep -c ' headlamp in ')" = 5 ] \
  || fail "the head-light query did not return 5 headlamps"
[ "$(rental_hits 'Semantic search "something warm to sleep in' | grep -c ' winter sleeping bag in ')" = 5 ] \
  || fail "the warm-sleep query did not return 5 winter sleeping bags"
filtered="$(rental_hits 'Semantic search "shelter for a family trip in the mountains", only in stock')"
[ "$(printf '%s\n' "$filtered" | grep -c .)" = 5 ] || fail "the filtered search did not print 5 results"
if printf '%s\n' "$filtered" | grep -q 'rented out'; then fail "the filtered search returned an item not in stock"; fi
if printf '%s\n' "$filtered" | grep -Ev ' winter ' | grep -q .; then fail "the filtered search returned an item not tagged winter"; fi
printf '%s\n' "$filtered" | awk '{ split($3, r, "/"); if (r[1] + 0 >= 20) bad = 1 } END { exit bad }' \
  || fail "the filtered search returned an item at 20.00 a day or more"
code="$(value '^Hybrid search "([A-Z]{2}-[0-9]{4}) .*')"
[ -n "$code" ] && rental_hits 'Hybrid search "' | head -n1 | grep -q "Model $code\.$" \
  || fail "hybrid search did not put the item with model code ${code:-?} first"
within "desk-note paraphrases ranked first (%)" "$(value '^Desk-note paraphrases: .* \(([0-9.]+) %\)$')" 80 100
within "catalogue paraphrases with the right category first (%)" "$(value '^Catalogue paraphrases .*right category for [0-9]+ \(([0-9.]+) %\).*')" 60 100
vector_first="$(value '^  vector search +[0-9]+ \( *([0-9.]+) %\).*')"
hybrid_first="$(value '^  hybrid, every query word a keyword +[0-9]+ \( *([0-9.]+) %\).*')"
code_first="$(value '^  hybrid, the code as the keyword +[0-9]+ \( *([0-9.]+) %\).*')"
within "model codes: vector search first (%)" "$vector_first" 0 30
within "model codes: hybrid search first (%)" "$hybrid_first" 35 100
within "model codes: hybrid search with the code as keyword first (%)" "$code_first" 60 100
need "the reopened store answering as the saved one" '^Saved and reopened the store directory .*: 3,456 items; same answers for 3 queries: yes$'

run ShardedSearch samples/ShardedSearch demo
need "the refused write" '^Upsert without the key: 401; item #0 afterwards: 404$'
need "the accepted write" '^Upsert with the key: 200, 200 items acknowledged on 8 shards$'
sharded="$(hits '^Search like touring kayak #3, k = 5 \(partial: False\):$')"
[ "$(printf '%s\n' "$sharded" | grep -c 'touring kayak')" = 5 ] || fail "the search did not return 5 touring kayaks: $sharded"
need "the filter" '^Filtered \(ids from 100, not #3\), k = 3: #[0-9]{3}, #[0-9]{3}, #[0-9]{3}$'
need "the edge's status codes" '^Status code summary: True$'
need "400 for k = 0" '^k = 0: 400$'
need "400 for NaN" '^NaN in the vector: 400$'
need "401 for status" '^Status without the key: 401$'
need "the load test" '^Load test: 16 clients, [0-9.]+ s: [0-9]+ requests, [0-9]+ requests/s, 0 errors$'
need "no lost write" '^  acknowledged items [1-9][0-9]*, lost 0$'

if [ "$problems" -gt 0 ]; then
  echo "check-samples: $problems problem(s) found" >&2
  exit 1
fi
echo "check-samples: every sample ran and printed what it should"
