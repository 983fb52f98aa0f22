// QuickStart: the graph index with default options over the invented catalogue of the Larchpass Outdoor Co-op:
// build, search, filter, measure recall against an exact index, save and load, then live updates. Everything is
// generated from a seed; the run takes a few seconds.
using System.Diagnostics;
using System.Globalization;
using QuickStart;
using VectorKit.Distance;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Persistence;

CultureInfo.CurrentCulture = CultureInfo.InvariantCulture;
const int ItemCount = 20_000;
const int Dimension = 64;
const int Seed = 7;
const int K = 10;
const int QueryCount = 1_000;

var catalogue = DemoCatalogue.Generate(ItemCount, Dimension, Seed);
long[] ids = catalogue.Items.Select(item => item.Id).ToArray();
var changed = new Dictionary<long, GearItem>(); // items added or refitted after the build
Console.WriteLine($"Larchpass Outdoor Co-op: rental catalogue demo (invented data, seed {Seed})");

// Build. Progress arrives from worker threads, so only the first report past each quarter is printed.
var clock = Stopwatch.StartNew();
using var index = new GraphIndex(Dimension, DistanceMetric.Cosine);
int quartersShown = 0;
index.AddRange(ids, catalogue.Vectors, new InlineProgress(done =>
{
    int quarter = done * 4 / ItemCount;
    for (int shown = Volatile.Read(ref quartersShown); quarter > shown; shown = Volatile.Read(ref quartersShown))
    {
        if (Interlocked.CompareExchange(ref quartersShown, quarter, shown) == shown)
        {
            Console.WriteLine($"  linked {done,6:#,0} of {ItemCount:#,0} items");
            break;
        }
    }
}));
Console.WriteLine($"Graph index (default options) built: {index.Count:#,0} items in {catalogue.CategoryCount} categories, {Dimension}-d cosine, {clock.Elapsed.TotalSeconds:0.0} s, {index.MemoryBytes / 1e6:0.0} MB");

// 1. Search with k: a described need, turned into a vector from the directions the catalogue was built from.
Console.WriteLine();
Console.WriteLine("Search, k = 5: \"winter, expedition touring skis\"");
Print(index.Search(catalogue.Describe("Snow", "touring skis", "winter", "expedition"), 5));

// 2. Filtered: start from a sleeping bag, keep only Water items on the shelf. The filter runs inside the search,
// so five matches come back even though a sleeping bag's nearest neighbours are mostly in Sleep.
GearItem bag = catalogue.Items.First(item => item.Kind == "sleeping bag" && item.Season == "summer");
Console.WriteLine();
Console.WriteLine($"Filtered search, k = 5, only Water items in stock, nearest to \"{bag.Name}\" ({Describe(bag)}):");
Print(index.Search(catalogue.VectorOf(bag.Id), 5, new SearchOptions { Filter = id => Item(id) is { Category: "Water", InStock: true } }));

// 3. Recall: the graph against an exact index over the same catalogue, for queries near random items.
float[] queries = catalogue.SampleQueries(QueryCount, Seed + 1);
using var exact = new ExactIndex(Dimension, DistanceMetric.Cosine, new ExactIndexOptions { InitialCapacity = ItemCount });
exact.AddRange(ids, catalogue.Vectors);
clock.Restart();
BatchSearchResults exactResults = exact.SearchBatch(queries, K);
double exactMs = clock.Elapsed.TotalMilliseconds;
clock.Restart();
BatchSearchResults graphResults = index.SearchBatch(queries, K);
double graphMs = clock.Elapsed.TotalMilliseconds;
double recall = Recall.AtK(NeighborTable.FromResults(exactResults), graphResults, K);
Console.WriteLine();
Console.WriteLine($"Graph vs exact index, {QueryCount:#,0} queries: recall@{K} = {recall:0.0000}; graph {graphMs:0} ms, exact {exactMs:0} ms for the batch");
Console.WriteLine($"  (of the true {K} nearest items, found by the exact index, the graph returned {recall:P1} on average)");

// 4. Save and load: the loaded index must answer exactly as the one that was saved.
string path = Path.Combine(Path.GetTempPath(), $"larchpass-catalogue-{Environment.ProcessId}.vkx");
IndexFile.Save(index, path);
long fileBytes = new FileInfo(path).Length;
clock.Restart();
using GraphIndex loaded = IndexFile.Load<GraphIndex>(path);
double loadMs = clock.Elapsed.TotalMilliseconds;
File.Delete(path);
bool same = SameAnswers(graphResults, loaded.SearchBatch(queries, K));
Console.WriteLine();
Console.WriteLine($"Saved {fileBytes / 1e6:0.0} MB, loaded in {loadMs:0} ms: {loaded.Count:#,0} items; same answers as the saved index for all {QueryCount:#,0} queries: {(same ? "yes" : "NO")}");

// 5. Live updates on the running index, watched through one query.
float[] wanted = catalogue.Describe("Shelter", "tent", "winter", "ultralight");
Console.WriteLine();
Console.WriteLine("Live updates; search, k = 3: \"winter, ultralight tent\"");
Print(index.Search(wanted, 3));

var arrival = new GearItem(ItemCount, "Larch Cairn UL tent", "Shelter", "tent", "winter", "ultralight", InStock: true);
changed[arrival.Id] = arrival;
index.Add(arrival.Id, catalogue.EmbedNew(arrival, Seed + 2));
Console.WriteLine($"After Add of new #{arrival.Id}:");
Print(index.Search(wanted, 3));

GearItem old = catalogue.Items.First(item => item.Kind == "tent" && item.Season == "summer" && item.Build == "expedition");
GearItem refitted = old with { Season = "winter", Build = "ultralight" };
changed[old.Id] = refitted;
bool replaced = index.AddOrReplace(old.Id, catalogue.EmbedNew(refitted, Seed + 3));
Console.WriteLine($"After AddOrReplace of #{old.Id}, refitted from {old.Season}, {old.Build} to {refitted.Season}, {refitted.Build} (replaced: {replaced}):");
Print(index.Search(wanted, 3));

index.Remove(arrival.Id);
Console.WriteLine($"After Remove of #{arrival.Id} ({index.Count:#,0} items):");
Print(index.Search(wanted, 3));

GearItem Item(long id) => changed.TryGetValue(id, out GearItem? item) ? item : catalogue.Items[(int)id];

static string Describe(GearItem item) => $"{item.Category}, {item.Season}, {item.Build}, {(item.InStock ? "in stock" : "booked")}";

static bool SameAnswers(BatchSearchResults a, BatchSearchResults b)
{
    for (int q = 0; q < a.QueryCount; q++)
    {
        if (!a[q].SequenceEqual(b[q]))
        {
            return false;
        }
    }

    return a.QueryCount == b.QueryCount;
}

void Print(SearchHit[] hits)
{
    foreach (SearchHit hit in hits)
    {
        GearItem item = Item(hit.Id);
        Console.WriteLine($"  {hit.Distance,7:0.0000}  #{item.Id,-6} {item.Name,-32} {Describe(item)}");
    }
}

internal sealed class InlineProgress(Action<int> report) : IProgress<int>
{
    public void Report(int value) => report(value);
}
