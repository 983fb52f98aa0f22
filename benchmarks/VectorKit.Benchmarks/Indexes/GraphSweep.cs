using System.Diagnostics;
using VectorKit.Distance;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.IO;
using VectorKit.Tests.TestData;

namespace VectorKit.Benchmarks.Indexes;

/// <summary>
/// A console harness (not BenchmarkDotNet, because each row needs a recall beside its throughput): builds the graph
/// index on 2 threads, then measures single-thread queries/s at several search widths with recall@10 against exact
/// ground truth, and the exact index's single-thread queries/s on the same queries in the same run. The machine may
/// be shared, so every throughput is the best of several timed passes (after an untimed one): interference only
/// ever slows a pass down.
/// </summary>
public static class GraphSweep
{
    private const int K = 10;

    /// <summary>Fashion-MNIST: the 60,000 training images as the base, the first 1,000 test images as queries.</summary>
    public static void RunFashionMnist(string directory)
    {
        VectorSet train = IdxFile.ReadVectors(Path.Combine(directory, "train-images-idx3-ubyte.gz"));
        VectorSet test = IdxFile.ReadVectors(Path.Combine(directory, "t10k-images-idx3-ubyte.gz"));
        int d = train.Dimension;
        Console.WriteLine($"Fashion-MNIST: {train.Count} × {d}, squared L2, 1000 queries");
        Sweep(train.Data, d, test.Data.AsSpan(0, 1000 * d).ToArray(), exactQueries: 1000, [10, 16, 24, 32, 48, 64, 96, 128, 256]);
    }

    /// <summary>
    /// The repository's seeded clustered generator: <paramref name="count"/> × <paramref name="dimension"/>, one cluster
    /// per 100 items (spread 0.2 around centres uniform in [−1, 1]ᵈ), 1,000 queries: the generator's next 1,000 rows,
    /// so from the same clusters; the exact index is timed on the first 200 of them (a full scan per query).
    /// </summary>
    public static void RunClustered(int count, int dimension)
    {
        int clusters = Math.Max(1, count / 100);
        Console.WriteLine($"clustered synthetic: {count} × {dimension}, {clusters} clusters, spread 0.2, squared L2, 1000 queries");
        // The queries are the generator's next 1,000 rows, from the same cluster centres as the data (another seed would
        // draw new centres, and every query would then lie far from every cluster).
        float[] all = ClusteredData.Generate(count + 1000, dimension, clusters, 0.2f, seed: 101);
        float[] data = all.AsSpan(0, count * dimension).ToArray();
        float[] queries = all.AsSpan(count * dimension).ToArray();
        Sweep(data, dimension, queries, exactQueries: 200, [10, 32, 128, 512, 1024, 2048, 4096]);
    }

    private static void Sweep(float[] data, int d, float[] queries, int exactQueries, int[] widths)
    {
        int count = data.Length / d;
        int queryCount = queries.Length / d;
        long[] ids = Enumerable.Range(0, count).Select(i => (long)i).ToArray();
        NeighbourTable truth;
        double exactQps;
        using (var exact = new ExactIndex(d, DistanceMetric.SquaredEuclidean))
        {
            exact.AddRange(ids, data);
            truth = GroundTruth.Compute(exact, queries, K);
            exactQps = SingleThreadQps(exact, queries.AsSpan(0, exactQueries * d).ToArray(), d, null, timedPasses: 2, out _);
        }

        long before = GC.GetTotalMemory(forceFullCollection: true);
        var watch = Stopwatch.StartNew();
        using var graph = new GraphIndex(d, DistanceMetric.SquaredEuclidean, new GraphIndexOptions { BuildParallelism = 2 });
        graph.AddRange(ids, data);
        watch.Stop();
        Console.WriteLine(
            $"build: {count} vectors × {d} on 2 threads in {watch.Elapsed.TotalSeconds:F1} s; {graph.MemoryBytes / (double)count:F0} bytes/vector " +
            $"({d * 4} of them the vector); index {graph.MemoryBytes / 1048576.0:F0} MiB; process peak working set {Process.GetCurrentProcess().PeakWorkingSet64 / 1048576.0:F0} MiB; " +
            $"managed heap grew {(GC.GetTotalMemory(forceFullCollection: true) - before) / 1048576.0:F0} MiB");
        Console.WriteLine($"exact index: {exactQps:F1} queries/s (single thread, {exactQueries} queries)");
        Console.WriteLine("width  recall@10  queries/s  × exact");
        foreach (int width in widths)
        {
            var options = new SearchOptions { SearchWidth = width };
            double qps = SingleThreadQps(graph, queries, d, options, timedPasses: 5, out long[][] found);
            double recall = Recall.AtK(Enumerable.Range(0, queryCount).Select(q => truth[q].ToArray()).ToList(), found, K);
            Console.WriteLine($"{width,5}  {recall,9:F4}  {qps,9:F0}  {qps / exactQps,7:F1}");
        }
    }

    private static double SingleThreadQps(IVectorIndex index, float[] queries, int d, SearchOptions? options, int timedPasses, out long[][] found)
    {
        int n = queries.Length / d;
        var hits = new SearchHit[K];
        found = new long[n][];
        double best = 0;

        // One untimed pass that keeps the results (for the recall) and warms up, then the timed passes.
        for (int q = 0; q < n; q++)
        {
            int written = index.Search(queries.AsSpan(q * d, d), hits, options);
            found[q] = hits.AsSpan(0, written).ToArray().Select(h => h.Id).ToArray();
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
