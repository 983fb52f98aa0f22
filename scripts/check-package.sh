#!/usr/bin/env bash
# Package smoke test: packs the library into a temporary feed, creates a fresh console app outside the repository,
# installs the package from that feed (its dependencies restore from the machine's usual package sources), then
# builds an exact and a graph index over invented vectors, searches, saves, loads back and searches again. The
# package readme's example is compiled and run in the same app, and so is a small use of the vector-store connector
# package (VectorKit.VectorData), packed into the same feed. Prints "package ok: ..." and exits non-zero on any
# failure; removes its temporary directories either way. Extra arguments go to `dotnet pack`.
set -euo pipefail
repo="$(cd "$(dirname "$0")/.." && pwd)"

work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
case "$work/" in
  "$repo"/*) echo "check-package: the temporary directory $work is inside the repository; set TMPDIR elsewhere" >&2; exit 1 ;;
esac
feed="$work/feed"
app="$work/app"
# A private package cache, so the freshly packed VectorKit is installed even when the same version number is
# already cached from an earlier pack.
export NUGET_PACKAGES="$work/packages"
export DOTNET_CLI_TELEMETRY_OPTOUT=1 DOTNET_NOLOGO=1 DOTNET_SKIP_FIRST_TIME_EXPERIENCE=1

echo "== pack"
dotnet pack "$repo/src/VectorKit" -c Release -o "$feed" --nologo -v quiet "$@"
dotnet pack "$repo/src/VectorKit.VectorData" -c Release -o "$feed/connector" --nologo -v quiet "$@"
mv "$feed"/connector/*.nupkg "$feed"/connector/*.snupkg "$feed"/ && rmdir "$feed/connector"
shopt -s nullglob
packages=("$feed"/VectorKit.[0-9]*.nupkg)
symbols=("$feed"/VectorKit.[0-9]*.snupkg)
connector=("$feed"/VectorKit.VectorData.[0-9]*.nupkg)
shopt -u nullglob
if [ "${#packages[@]}" -ne 1 ] || [ "${#symbols[@]}" -ne 1 ] || [ "${#connector[@]}" -ne 1 ]; then
  echo "check-package: expected one .nupkg and one .snupkg in the feed, found: $(ls "$feed")" >&2
  exit 1
fi
version="$(basename "${packages[0]}" .nupkg)"
version="${version#VectorKit.}"
echo "VectorKit $version"

# The Orleans package packs with its own readme (its example needs a cluster, which docs/sharding.md and the tests cover).
dotnet pack "$repo/src/VectorKit.Orleans" -c Release -o "$work/orleans" --nologo -v quiet "$@"
orleans=("$work"/orleans/VectorKit.Orleans.[0-9]*.nupkg)
python3 - "${orleans[0]}" <<'PY' || { echo "check-package: VectorKit.Orleans lacks PACKAGE.md as its readme" >&2; exit 1; }
import sys, zipfile
with zipfile.ZipFile(sys.argv[1]) as z:
    nuspec = next(n for n in z.namelist() if n.endswith(".nuspec"))
    ok = "PACKAGE.md" in z.namelist() and "<readme>PACKAGE.md</readme>" in z.read(nuspec).decode()
sys.exit(0 if ok else 1)
PY
echo "VectorKit.Orleans $(basename "${orleans[0]}" .nupkg | sed 's/^VectorKit.Orleans.//') packs with PACKAGE.md"

# The package carries its own readme and a license expression, and not the repository README.
nuspec="$(unzip -p "${packages[0]}" VectorKit.nuspec)"
# The listing is read whole first: `grep -q` quits at the first match, and under pipefail the listing's SIGPIPE would fail the check.
listing="$(unzip -l "${packages[0]}")"
grep -q ' PACKAGE.md$' <<<"$listing" || { echo "check-package: PACKAGE.md is missing from the package" >&2; exit 1; }
grep -q '<readme>PACKAGE.md</readme>' <<<"$nuspec" || { echo "check-package: the nuspec does not name PACKAGE.md as its readme" >&2; exit 1; }
grep -q '<license type="expression">MIT</license>' <<<"$nuspec" || { echo "check-package: the nuspec has no MIT license expression" >&2; exit 1; }
if grep -q ' README.md$' <<<"$listing"; then
  echo "check-package: the repository README.md was packed" >&2; exit 1
fi

echo "== fresh console app"
mkdir -p "$app"
cd "$app"
dotnet new console --name PackageCheck --output . --no-restore >/dev/null
# Stop MSBuild's upward search here, whatever directory the temporary one sits in.
printf '<Project />\n' > Directory.Build.props
printf '<Project />\n' > Directory.Build.targets
printf '<Project />\n' > Directory.Packages.props
# The temporary feed is added to the machine's own sources (user and machine NuGet.Config), not in place of them.
cat > nuget.config <<EOF
<?xml version="1.0" encoding="utf-8"?>
<configuration>
  <packageSources>
    <add key="vectorkit-check" value="$feed" />
  </packageSources>
</configuration>
EOF
dotnet add package VectorKit --version "$version" >/dev/null
dotnet add package VectorKit.VectorData --version "$version" >/dev/null

# The readme's example, unchanged, as a method: its using lines go on top, the rest into the body.
example="$(awk '/^```csharp$/ { inside = 1; next } /^```$/ { if (inside) exit } inside' "$repo/src/VectorKit/PACKAGE.md")"
[ -n "$example" ] || { echo "check-package: no csharp example found in PACKAGE.md" >&2; exit 1; }
{
  grep '^using [A-Za-z.]*;$' <<<"$example"
  echo 'static class ReadmeExample'
  echo '{'
  echo '    public static void Run()'
  echo '    {'
  grep -v '^using [A-Za-z.]*;$' <<<"$example"
  echo '    }'
  echo '}'
} > ReadmeExample.cs

# The vector-store connector, installed from the same feed: a typed collection, a filtered search, a save.
cat > StoreCheck.cs <<'EOF'
using Microsoft.Extensions.VectorData;
using VectorKit.VectorData;

public sealed class GearItem
{
    [VectorStoreKey] public int Id { get; set; }
    [VectorStoreData] public string Name { get; set; } = string.Empty;
    [VectorStoreData] public bool InStock { get; set; }
    [VectorStoreVector(3)] public ReadOnlyMemory<float> Embedding { get; set; }
}

static class StoreCheck
{
    public static async Task<string> RunAsync(string directory)
    {
        var store = new VectorKitStore(new VectorKitStoreOptions { Directory = directory });
        var items = store.GetCollection<int, GearItem>("gear");
        await items.EnsureCollectionExistsAsync();
        await items.UpsertAsync(new GearItem[]
        {
            new() { Id = 1, Name = "two-person tent", InStock = true, Embedding = new float[] { 1, 0, 0 } },
            new() { Id = 2, Name = "winter sleeping bag", InStock = false, Embedding = new float[] { 0.9f, 0.1f, 0 } },
            new() { Id = 3, Name = "touring kayak", InStock = true, Embedding = new float[] { 0, 0, 1 } },
        });
        var names = new List<string>();
        await foreach (var hit in items.SearchAsync(new ReadOnlyMemory<float>(new float[] { 0.95f, 0.05f, 0 }), 2, new() { Filter = r => r.InStock }))
            names.Add(hit.Record.Name);
        if (names.Count != 2 || names[0] != "two-person tent" || names[1] != "touring kayak")
            throw new InvalidOperationException("connector search returned: " + string.Join(", ", names));
        await store.SaveAsync();
        return string.Join(", ", names);
    }
}
EOF

cat > Program.cs <<'EOF'
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Persistence;

const int Dimension = 24, Count = 2_000, QueryCount = 20, K = 10;
var random = new Random(11);
float[] vectors = new float[Count * Dimension];
for (int i = 0; i < vectors.Length; i++)
    vectors[i] = (float)(random.NextDouble() * 2 - 1);
long[] ids = new long[Count];
for (int i = 0; i < Count; i++)
    ids[i] = 1_000 + 7L * i;
float[] queries = new float[QueryCount * Dimension];
for (int i = 0; i < queries.Length; i++)
    queries[i] = (float)(random.NextDouble() * 2 - 1);

string directory = args[0];
int results = 0;
int agreed = 0;
using var exact = new ExactIndex(Dimension, DistanceMetric.SquaredEuclidean);
using var graph = new GraphIndex(Dimension, DistanceMetric.SquaredEuclidean, new GraphIndexOptions { Seed = 3 });
exact.AddRange(ids, vectors);
graph.AddRange(ids, vectors);

string exactPath = Path.Combine(directory, "exact.vkx"), graphPath = Path.Combine(directory, "graph.vkx");
IndexFile.Save(exact, exactPath);
IndexFile.Save(graph, graphPath);
using ExactIndex exactLoaded = IndexFile.Load<ExactIndex>(exactPath);
using GraphIndex graphLoaded = IndexFile.Load<GraphIndex>(graphPath);
Check(exactLoaded.Count == Count && graphLoaded.Count == Count, $"loaded counts {exactLoaded.Count}, {graphLoaded.Count}");

for (int q = 0; q < QueryCount; q++)
{
    ReadOnlySpan<float> query = queries.AsSpan(q * Dimension, Dimension);
    SearchHit[] truth = exact.Search(query, K);
    SearchHit[] found = graph.Search(query, K);
    Check(truth.Length == K && found.Length == K, $"query {q}: {truth.Length} exact and {found.Length} graph hits");
    Check(truth.AsSpan().SequenceEqual(exactLoaded.Search(query, K)), $"query {q}: the loaded exact index answers differently");
    Check(found.AsSpan().SequenceEqual(graphLoaded.Search(query, K)), $"query {q}: the loaded graph index answers differently");
    foreach (SearchHit hit in found)
        agreed += Array.Exists(truth, t => t.Id == hit.Id) ? 1 : 0;
    results += found.Length;
}
double recall = (double)agreed / results;
Check(recall >= 0.9, $"graph recall@{K} {recall:0.000} is below 0.9");

ReadmeExample.Run();
string connector = StoreCheck.RunAsync(Path.Combine(directory, "store")).GetAwaiter().GetResult();
Console.WriteLine($"package ok: {results} results, graph recall@{K} {recall:0.000}, save and load round trip equal; connector: {connector}");

static void Check(bool condition, string message)
{
    if (!condition)
        throw new InvalidOperationException(message);
}
EOF

echo "== build and run"
dotnet build -c Release --nologo -v quiet
output="$(dotnet run -c Release --no-build -- "$work")"
echo "$output"
grep -q '^package ok: ' <<<"$output"
