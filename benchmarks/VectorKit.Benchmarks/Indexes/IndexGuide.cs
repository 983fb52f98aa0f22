using System.Diagnostics;
using System.Globalization;
using System.Runtime.InteropServices;
using VectorKit.Distance;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;

namespace VectorKit.Benchmarks.Indexes;

/// <summary>
/// A console harness that puts every index kind side by side at its default options on one real data set, for the
/// "which index should I use" table: Fashion-MNIST (60,000 train images × 784, squared Euclidean), the first 1,000 test
/// images as queries, ground truth from the float32 exact index. Per index it reports bytes per vector in memory, build
/// time (train + add), recall@10 at the index's default search settings, single-query queries/s on one thread (median
/// of 3 timed passes over the queries after an untimed one) and batch queries/s (<c>SearchBatch</c> of all queries on
/// every core, median of 3 after an untimed one). After the timings each index takes one Add, AddOrReplace and Remove,
/// so the "live updates" column is checked, not assumed.
/// </summary>
public static class IndexGuide
{
    private const int K = 10;
    private const int TrainCount = 60_000;
    private const int QueryCount = 1_000;
    private const int Passes = 3;

    private sealed record Row(string Name, int Items, double BytesPerVector, double BuildSeconds, double Recall, double SingleQps, double BatchQps, bool LiveUpdates, string WhenToUse);

    /// <summary>Runs the guide; <paramref name="withDefaultLists"/> adds the inverted file at its default 1,024 lists.</summary>
    public static void Run(bool withDefaultLists)
    {
        var total = Stopwatch.StartNew();
        int d = TestData.ImageDimension;
        float[] data = TestData.Images(TestData.FashionTrainImages, TrainCount, seed: 1, out string dataSource);
        float[] queries = TestData.Images(TestData.FashionTestImages, QueryCount, seed: 2, out string querySource);
        long[] ids = Enumerable.Range(0, TrainCount).Select(i => (long)i).ToArray();
        Console.WriteLine($"data: {dataSource}; queries: {querySource}; squared Euclidean, k = {K}");

        var rows = new List<Row>();
        NeighborTable? truth = null;

        Measure(rows, "exact, float32", () => new ExactIndex(d, DistanceMetric.SquaredEuclidean), train: false,
            "Exact answers; a query reads every vector, so keep it to small sets.", data, ids, queries, ref truth);
        Measure(rows, "exact, 8-bit", () => new ExactIndex(d, DistanceMetric.SquaredEuclidean, new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = 0 }), train: true,
            "Exact-scan simplicity in about a quarter of the memory, recall just under 1.", data, ids, queries, ref truth);
        Measure(rows, "graph, float32", () => new GraphIndex(d, DistanceMetric.SquaredEuclidean), train: false,
            "Fastest single queries at high recall; holds the vectors plus graph links.", data, ids, queries, ref truth);
        Measure(rows, "graph, 8-bit", () => new GraphIndex(d, DistanceMetric.SquaredEuclidean, new GraphIndexOptions { Encoding = VectorEncoding.Scalar8Bit }), train: true,
            "Graph recall in under a third of the memory, and faster walks than float32 on high-dimensional data.", data, ids, queries, ref truth);
        Measure(rows, "inverted file, float32, 256 lists", () => new InvertedFileIndex(d, DistanceMetric.SquaredEuclidean, new InvertedFileOptions { ListCount = 256 }), train: true,
            "Quick to build; raise or lower lists probed (SearchWidth) to trade speed for recall.", data, ids, queries, ref truth);
        if (withDefaultLists)
        {
            Measure(rows, "inverted file, float32, 1,024 lists (default)", () => new InvertedFileIndex(d, DistanceMetric.SquaredEuclidean), train: true,
                "The default suits about 1M items; at 60,000 its lists are short, so the default probes find less.", data, ids, queries, ref truth);
        }

        Measure(rows, "inverted file, product codes 56 B + re-scoring 100, 256 lists", () => new InvertedFileIndex(d, DistanceMetric.SquaredEuclidean, new InvertedFileOptions
        {
            ListCount = 256,
            Encoding = VectorEncoding.ProductCodes,
            ProductCodeBytes = 56,
            RescoreDepth = 100,
        }), train: true, "Scans 56-byte codes, re-scores from full vectors kept in memory; slow training.", data, ids, queries, ref truth);
        Measure(rows, "inverted file, four-bit fast-scan codes 56 B + re-scoring 100, 256 lists", () => new InvertedFileIndex(d, DistanceMetric.SquaredEuclidean, new InvertedFileOptions
        {
            ListCount = 256,
            Encoding = VectorEncoding.ProductCodes,
            ProductCodeLayout = ProductCodeLayout.FourBitFastScan,
            ProductCodeBytes = 56,
            RescoreDepth = 100,
        }), train: true, "The same bytes scanned several times faster (codes in registers); coarser codes, so keep re-scoring on.", data, ids, queries, ref truth);

        Console.WriteLine();
        Console.WriteLine("| index | items | bytes/vector | build (train + add) | recall@10 | queries/s, 1 thread | queries/s, batch | live updates | when to use |");
        Console.WriteLine("|---|---:|---:|---:|---:|---:|---:|---|---|");
        foreach (Row row in rows)
        {
            Console.WriteLine(string.Create(CultureInfo.InvariantCulture,
                $"| {row.Name} | {row.Items:N0} | {row.BytesPerVector:F0} | {row.BuildSeconds:F1} s | {row.Recall:F4} | {row.SingleQps:F0} | {row.BatchQps:F0} | {(row.LiveUpdates ? "yes" : "no")} | {row.WhenToUse} |"));
        }

        Console.WriteLine();
        Console.WriteLine("Default options everywhere except the inverted file's ListCount = 256 (default 1,024) and the product-code rows' encoding, layout, 56-byte codes and re-scoring depth 100. "
            + "Recall is against the float32 exact index's answers (ties by id), so its own row is 1 by construction. Bytes/vector is MemoryBytes / Count, full vectors included where kept.");
        Console.WriteLine(string.Create(CultureInfo.InvariantCulture,
            $"machine: {Environment.ProcessorCount} cores, {RuntimeInformation.FrameworkDescription}, {RuntimeInformation.OSDescription}, {RuntimeInformation.ProcessArchitecture}; {DateTime.UtcNow:yyyy-MM-dd HH:mm} UTC; ran {total.Elapsed.TotalSeconds:F0} s; {LoadAverage()}"));
        Console.WriteLine($"process peak working set {Process.GetCurrentProcess().PeakWorkingSet64 / 1048576.0:F0} MiB");
    }

    /// <summary>The 1, 5 and 15 minute load averages where the system reports them (other work shares the cores).</summary>
    private static string LoadAverage()
        => File.Exists("/proc/loadavg")
            ? "load average " + string.Join(" / ", File.ReadAllText("/proc/loadavg").Split(' ').Take(3))
            : "load average not available";

    private static void Measure(List<Row> rows, string name, Func<VectorIndex> create, bool train, string whenToUse, float[] data, long[] ids, float[] queries, ref NeighborTable? truth)
    {
        int d = TestData.ImageDimension;
        var watch = Stopwatch.StartNew();
        using VectorIndex index = create();
        if (train)
        {
            index.Train(data);
        }

        index.AddRange(ids, data);
        double build = watch.Elapsed.TotalSeconds;

        // The first index built is the float32 exact one: its answers are the ground truth for every row.
        truth ??= GroundTruth.Compute(index, queries, K);
        NeighborTable table = truth;

        double single = SingleThreadQps(index, queries, d, out long[][] found);
        List<long[]> truthRows = [.. Enumerable.Range(0, QueryCount).Select(q => table[q].ToArray())];
        double recall = Recall.AtK(truthRows, found, K);
        double batch = BatchQps(index, queries);
        double bytes = index.MemoryBytes / (double)index.Count;
        int items = index.Count;
        bool live = LiveUpdatesWork(index, data, d);
        Console.WriteLine(string.Create(CultureInfo.InvariantCulture,
            $"{name}: built in {build:F1} s, recall@10 {recall:F4}, {single:F0} queries/s single thread, {batch:F0} batch"));
        rows.Add(new Row(name, items, bytes, build, recall, single, batch, live, whenToUse));
    }

    private static double SingleThreadQps(IVectorIndex index, float[] queries, int d, out long[][] found)
    {
        int n = queries.Length / d;
        var hits = new SearchHit[K];
        found = new long[n][];

        // The untimed warm-up pass also collects the answers for recall.
        for (int q = 0; q < n; q++)
        {
            int written = index.Search(queries.AsSpan(q * d, d), hits);
            found[q] = [.. hits.AsSpan(0, written).ToArray().Select(h => h.Id)];
        }

        var rates = new double[Passes];
        for (int pass = 0; pass < Passes; pass++)
        {
            var watch = Stopwatch.StartNew();
            for (int q = 0; q < n; q++)
            {
                index.Search(queries.AsSpan(q * d, d), hits);
            }

            rates[pass] = n / watch.Elapsed.TotalSeconds;
        }

        Array.Sort(rates);
        return rates[Passes / 2];
    }

    private static double BatchQps(IVectorIndex index, float[] queries)
    {
        index.SearchBatch(queries, K);
        var rates = new double[Passes];
        for (int pass = 0; pass < Passes; pass++)
        {
            var watch = Stopwatch.StartNew();
            index.SearchBatch(queries, K);
            rates[pass] = QueryCount / watch.Elapsed.TotalSeconds;
        }

        Array.Sort(rates);
        return rates[Passes / 2];
    }

    /// <summary>One Add of a new id, one AddOrReplace of an existing id and one Remove; true when each took effect.</summary>
    private static bool LiveUpdatesWork(IVectorIndex index, float[] data, int d)
    {
        long fresh = TrainCount;
        index.Add(fresh, data.AsSpan(0, d));
        bool replaced = index.AddOrReplace(1, data.AsSpan(2 * d, d));
        index.Remove(fresh);
        return replaced && !index.Contains(fresh) && index.Contains(1) && index.Count == TrainCount;
    }
}
