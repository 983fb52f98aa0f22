using System.Diagnostics;
using System.Globalization;
using VectorKit.Distance;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Tests.TestData;

namespace VectorKit.Benchmarks.Indexes;

/// <summary>
/// A console harness for the inverted-file index (recall beside every throughput, so not BenchmarkDotNet): on the
/// repository's seeded clustered generator, trains and builds float32, product-code and 8-bit variants on 2 threads,
/// then measures recall@10 against exact ground truth and single-thread queries/s per number of lists probed (and
/// re-scoring depth), with the exact index timed on the same queries in the same run. Each throughput is the best of
/// 3 timed passes after an untimed one: on a shared machine interference only ever slows a pass down.
/// </summary>
public static class InvertedFileSweep
{
    private const int K = 10;
    private const int QueryCount = 1000;
    private const int ExactQueries = 200;

    public static void Run(int count, int dimension, int lists, int productBytes)
    {
        int clusters = Math.Max(1, count / 100);
        Console.WriteLine($"clustered synthetic: {count} × {dimension}, {clusters} clusters, spread 0.2, squared L2, {QueryCount} queries; {lists} lists; {Environment.ProcessorCount} cores");
        // The queries are the generator's next 1,000 rows: the same cluster centres as the data (the first `count` rows
        // are exactly the graph sweep's data set). A second seed would draw new centres, far from every stored cluster.
        float[] all = ClusteredData.Generate(count + QueryCount, dimension, clusters, 0.2f, seed: 101);
        float[] data = all.AsSpan(0, count * dimension).ToArray();
        float[] queries = all.AsSpan(count * dimension).ToArray();
        all = [];
        long[] ids = Enumerable.Range(0, count).Select(i => (long)i).ToArray();
        int d = dimension;

        // The exact index is timed before and after the sweep (the machine is shared, so its load drifts); the ratios
        // use the mean of the two.
        var clock = Stopwatch.StartNew();
        using var exact = new ExactIndex(d, DistanceMetric.SquaredEuclidean);
        exact.AddRange(ids, data);
        long exactBytes = exact.MemoryBytes;
        NeighborTable truth = GroundTruth.Compute(exact, queries, K);
        float[] exactQueries = queries.AsSpan(0, ExactQueries * d).ToArray();
        double exactBefore = SingleThreadQps(exact, exactQueries, d, null, timedPasses: 2, out _);
        double exactQps = exactBefore;
        Console.WriteLine($"exact index: {exactBefore:F1} queries/s single thread ({ExactQueries} queries), {exactBytes / (double)count:F0} bytes/vector; ground truth and timing took {clock.Elapsed.TotalSeconds:F0} s");
        Console.WriteLine();
        Console.WriteLine("| index | train + build, 2 threads | bytes/vector searched | bytes/vector in memory | lists probed | re-scored | recall@10 | queries/s (1 thread) | × exact |");
        Console.WriteLine("|---|---:|---:|---:|---:|---:|---:|---:|---:|");
        int[] probes = [1, 2, 4, 8, 16, 32];

        Sweep("IVF, float32 lists", new InvertedFileOptions { ListCount = lists, MaxDegreeOfParallelism = 2 }, data, ids, queries, truth, exactQps, probes, [0]);
        Sweep($"IVF + PQ {productBytes} B (+ re-scoring)", new InvertedFileOptions { ListCount = lists, MaxDegreeOfParallelism = 2, Encoding = VectorEncoding.ProductCodes, ProductCodeBytes = productBytes, RescoreDepth = 100 }, data, ids, queries, truth, exactQps, probes, [0, 50, 100]);
        Sweep("IVF + 8-bit", new InvertedFileOptions { ListCount = lists, MaxDegreeOfParallelism = 2, Encoding = VectorEncoding.Scalar8Bit }, data, ids, queries, truth, exactQps, probes, [0]);
        double exactAfter = SingleThreadQps(exact, exactQueries, d, null, timedPasses: 2, out _);
        Console.WriteLine($"exact index after the sweep: {exactAfter:F1} queries/s single thread (before: {exactBefore:F1}); the × exact column divides by the before figure");
        Console.WriteLine($"process peak working set {Process.GetCurrentProcess().PeakWorkingSet64 / 1048576.0:F0} MiB");
    }

    private static void Sweep(string name, InvertedFileOptions options, float[] data, long[] ids, float[] queries, NeighborTable truth, double exactQps, int[] probes, int[] depths)
    {
        int d = queries.Length / QueryCount;
        int count = ids.Length;
        var watch = Stopwatch.StartNew();
        using var index = new InvertedFileIndex(d, DistanceMetric.SquaredEuclidean, options);
        index.Train(data);
        double train = watch.Elapsed.TotalSeconds;
        index.AddRange(ids, data);
        watch.Stop();
        string build = string.Create(CultureInfo.InvariantCulture, $"{watch.Elapsed.TotalSeconds:F0} s ({train:F0} s training)");
        double memory = index.MemoryBytes / (double)count;
        List<long[]> truthRows = [.. Enumerable.Range(0, QueryCount).Select(q => truth[q].ToArray())];
        foreach (int probe in probes)
        {
            foreach (int depth in depths)
            {
                var search = new SearchOptions { SearchWidth = probe, RescoreDepth = index.KeepsFullVectors ? depth : null };
                double qps = SingleThreadQps(index, queries, d, search, timedPasses: 3, out long[][] found);
                double recall = Recall.AtK(truthRows, found, K);
                string rescored = index.KeepsFullVectors ? (depth == 0 ? "no" : depth.ToString(CultureInfo.InvariantCulture)) : "–";
                Console.WriteLine(string.Create(CultureInfo.InvariantCulture,
                    $"| {name} | {build} | {index.CodeBytesPerVector} | {memory:F0} | {probe} | {rescored} | {recall:F4} | {qps:F0} | {qps / exactQps:F1} |"));
                build = "″";
            }
        }
    }

    internal static double SingleThreadQps(IVectorIndex index, float[] queries, int d, SearchOptions? options, int timedPasses, out long[][] found)
    {
        int n = queries.Length / d;
        var hits = new SearchHit[K];
        found = new long[n][];
        double best = 0;
        for (int q = 0; q < n; q++)
        {
            int written = index.Search(queries.AsSpan(q * d, d), hits, options);
            found[q] = [.. hits.AsSpan(0, written).ToArray().Select(h => h.Id)];
        }

        for (int pass = 0; pass < timedPasses; pass++)
        {
            var watch = Stopwatch.StartNew();
            for (int q = 0; q < n; q++)
            {
                index.Search(queries.AsSpan(q * d, d), hits, options);
            }

            watch.Stop();
            best = Math.Max(best, n / watch.Elapsed.TotalSeconds);
        }

        return best;
    }
}
