#!/usr/bin/env bash
# Makes the text-embedding data set (Debian package descriptions embedded with all-MiniLM-L6-v2) in a cache folder
# outside the repository; does nothing when that folder's checksummed manifest is complete.
#   scripts/make-text-embeddings.sh [items]     items: how many item texts (default: all, about 59,000)
# Environment: VECTORKIT_DATA (default ~/.cache/vectorkit), TEXT_EMBEDDING_THREADS (default 2).
# Not part of CI: the full run takes long on 2 shared cores (docs/data-sets.md gives a measured time).
set -euo pipefail
cd "$(dirname "$0")/.."

items="${1:-all}"
root="${VECTORKIT_DATA:-$HOME/.cache/vectorkit}/text-embeddings"
if [[ "$items" == all ]]; then out="$root/full"; else out="$root/items-$items"; fi

if [[ -f "$out/manifest.sha256" ]] && (cd "$out" && sha256sum --quiet -c manifest.sha256); then
  echo "complete already (manifest checks): $out"
  ls -l "$out"
  exit 0
fi

# The texts: Debian's English descriptions of the main archive, copied once into the cache so that a later
# apt-get update cannot change a half-made data set.
src="$root/source"
mkdir -p "$src"
if [[ ! -s "$src/Translation-en" || ! -s "$src/InRelease" ]]; then
  codename="$(. /etc/os-release && echo "$VERSION_CODENAME")"
  lists=/var/lib/apt/lists
  find_list() { find "$lists" -maxdepth 1 -name "*_dists_${codename}_$1" | head -n 1; }
  translation="$(find_list 'main_i18n_Translation-en*')"
  if [[ -z "$translation" ]]; then
    echo "no English descriptions in $lists; fetching the lists with them (apt-get update, needs root)"
    apt-get update -o 'Acquire::Languages::=en' >/dev/null
    translation="$(find_list 'main_i18n_Translation-en*')"
  fi
  [[ -n "$translation" ]] || { echo "error: no Translation-en for $codename main" >&2; exit 1; }
  /usr/lib/apt/apt-helper cat-file "$translation" > "$src/Translation-en.tmp"
  mv "$src/Translation-en.tmp" "$src/Translation-en"
  cp "$(find_list InRelease)" "$src/InRelease"
fi

# Embeddings are kept in $root/partial as they are made: a stopped run, or a larger item count, continues from them.
start=$SECONDS
nice -n 10 dotnet build benchmarks/VectorKit.TextEmbeddings -c Release --nologo -v q
nice -n 10 dotnet benchmarks/VectorKit.TextEmbeddings/bin/Release/net10.0/VectorKit.TextEmbeddings.dll \
  --source "$src/Translation-en" --release "$src/InRelease" --out "$out" --items "$items" \
  --threads "${TEXT_EMBEDDING_THREADS:-2}" --work "$root/partial"
echo "wrote $out in $(( (SECONDS - start) / 60 )) min $(( (SECONDS - start) % 60 )) s:"
ls -l "$out"
cat "$out/source.txt"
