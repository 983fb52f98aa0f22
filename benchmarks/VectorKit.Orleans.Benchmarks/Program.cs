using System.Diagnostics;
using System.Globalization;
using Orleans.TestingHost;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Orleans;

// fan-out [items] [dimension] [seconds per row] [kind: exact|graph] [concurrency]
// One index in-process, then the same items as a collection of 8 shards (1 copy) on 1, 2 and 4 silos in this
// process, searched through the client API (router grain, one shard call each, merge). Prints latency percentiles,
// queries/s at the given concurrency, recall@10 against exact ground truth, and each shard's own search cost.
if (args.Length == 0 || args[0] != "fan-out")
{
    Console.Error.WriteLine("usage: fan-out [items=100000] [dimension=32] [seconds=10] [exact|graph] [concurrency=8]");
    return 2;
}

int items = Arg(1, 100_000);
int dimension = Arg(2, 32);
int seconds = Arg(3, 10);
bool graph = args.Length > 4 && args[4] == "graph";
int concurrency = Arg(5, 8);
const int Shards = 8, K = 10, QueryPool = 500;

var random = new Random(1);
long[] ids = [.. Enumerable.Range(0, items).Select(i => (long)i)];
float[] vectors = Rows(items);
float[] queries = Rows(QueryPool);
using var truthIndex = new ExactIndex(dimension, DistanceMetric.SquaredEuclidean);
truthIndex.AddRange(ids, vectors);
BatchSearchResults truth = truthIndex.SearchBatch(queries, K);
Console.WriteLine($"fan-out: {items:N0} items × {dimension}, {(graph ? "graph" : "exact")} shards, S = {Shards}, R = 1, k = {K}, concurrency {concurrency}, {seconds} s per row, {Environment.ProcessorCount} cores");
Console.WriteLine("| setup | silos | p50 ms | p99 ms | queries/s | recall@10 |");
Console.WriteLine("|---|---:|---:|---:|---:|---:|");

IVectorIndex single = graph ? new GraphIndex(dimension, DistanceMetric.SquaredEuclidean) : new ExactIndex(dimension, DistanceMetric.SquaredEuclidean);
single.AddRange(ids, vectors);
await Row("one index, direct", 0, q => Task.FromResult(single.Search(queries.AsMemory(q * dimension, dimension), K)));

// One shard's own cost: an index of items / S.
IVectorIndex shardSized = graph ? new GraphIndex(dimension, DistanceMetric.SquaredEuclidean) : new ExactIndex(dimension, DistanceMetric.SquaredEuclidean);
shardSized.AddRange(ids.AsSpan(0, items / Shards), vectors.AsSpan(0, items / Shards * dimension));
var clock = Stopwatch.StartNew();
int shardQueries = 0;
while (clock.Elapsed.TotalSeconds < Math.Max(2, seconds / 2))
{
    shardSized.Search(queries.AsSpan(shardQueries % QueryPool * dimension, dimension), K);
    shardQueries++;
}

Console.WriteLine($"one shard's search ({items / Shards:N0} items, one thread, direct): {clock.Elapsed.TotalMilliseconds * 1000 / shardQueries:F0} µs per query");

foreach (int silos in new[] { 1, 2, 4 })
{
    string root = Path.Combine(Path.GetTempPath(), "vectorkit-fan-out-" + Guid.NewGuid().ToString("N"));
    var builder = new InProcessTestClusterBuilder((short)silos);
    builder.ConfigureSilo((_, silo) => silo.AddVectorKitSharding(new LocalDirectoryShardStore(root)));
    InProcessTestCluster cluster = builder.Build();
    await cluster.DeployAsync();
    try
    {
        ShardedVectorCollection collection = await ShardedVectorCollection.CreateAsync(cluster.Client, new ShardedCollectionDefinition
        {
            Name = "fan-out",
            Dimension = dimension,
            ShardCount = Shards,
            ReplicaCount = 1,
            IndexKind = graph ? ShardIndexKind.Graph : ShardIndexKind.Exact,
        });
        for (int start = 0; start < items; start += 10_000)
        {
            int count = Math.Min(10_000, items - start);
            await collection.UpsertAsync(ids.AsMemory(start, count), vectors.AsMemory(start * dimension, count * dimension));
        }

        await Row("8 shards via router", silos, async q => (await collection.SearchAsync(queries.AsMemory(q * dimension, dimension), K)).Hits);
    }
    finally
    {
        await cluster.StopAllSilosAsync();
        await cluster.DisposeAsync();
        Directory.Delete(root, recursive: true);
    }
}

return 0;

async Task Row(string setup, int silos, Func<int, Task<SearchHit[]>> search)
{
    double recall = 0;
    for (int q = 0; q < 100; q++)
    {
        var expected = new HashSet<long>();
        foreach (SearchHit h in truth[q])
        {
            expected.Add(h.Id);
        }

        recall += (await search(q)).Count(h => expected.Contains(h.Id)) / (double)K;
    }

    recall /= 100;
    var latencies = new List<double>[concurrency];
    var run = Stopwatch.StartNew();
    await Task.WhenAll(Enumerable.Range(0, concurrency).Select(c => Task.Run(async () =>
    {
        var mine = latencies[c] = [];
        int q = c * 37;
        while (run.Elapsed.TotalSeconds < seconds)
        {
            long start = Stopwatch.GetTimestamp();
            await search(q++ % QueryPool);
            mine.Add(Stopwatch.GetElapsedTime(start).TotalMilliseconds);
        }
    })));
    double elapsed = run.Elapsed.TotalSeconds;
    double[] all = [.. latencies.SelectMany(l => l).Order()];
    Console.WriteLine(string.Create(CultureInfo.InvariantCulture,
        $"| {setup} | {(silos == 0 ? "–" : silos)} | {Pct(all, 0.5):F2} | {Pct(all, 0.99):F2} | {all.Length / elapsed:F0} | {recall:F3} |"));
}

static double Pct(double[] sorted, double p) => sorted[Math.Min(sorted.Length - 1, (int)Math.Ceiling(p * sorted.Length) - 1)];

float[] Rows(int count)
{
    var v = new float[count * dimension];
    for (int i = 0; i < v.Length; i++)
    {
        v[i] = (float)((random.NextDouble() * 2) - 1);
    }

    return v;
}

int Arg(int at, int fallback) => args.Length > at && int.TryParse(args[at], out int v) ? v : fallback;
