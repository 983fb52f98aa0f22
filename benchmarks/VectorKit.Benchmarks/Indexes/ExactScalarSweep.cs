using System.Diagnostics;
using System.Globalization;
using VectorKit.Distance;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Tests.TestData;

namespace VectorKit.Benchmarks.Indexes;

/// <summary>
/// A console harness for the exact index under 8-bit storage (recall beside every throughput, so not BenchmarkDotNet):
/// on the repository's seeded clustered generator (the inverted-file sweep's data and queries), builds the float32
/// exact index, an 8-bit index without full vectors and one keeping them for re-scoring, then reports bytes per
/// vector, recall@10 against the float32 exact index's answers and single-thread queries/s. Each throughput is the best
/// of 3 timed passes after an untimed one; the float32 index is timed before and after the 8-bit runs, and the ratios
/// divide by the faster of the two (the conservative choice on a shared machine).
/// </summary>
public static class ExactScalarSweep
{
    private const int K = 10;
    private const int QueryCount = 200;

    public static void Run(int count, int dimension)
    {
        int clusters = Math.Max(1, count / 100);
        int d = dimension;
        Console.WriteLine($"clustered synthetic: {count} × {dimension}, {clusters} clusters, spread 0.2, squared L2, {QueryCount} queries, k = {K}; {Environment.ProcessorCount} cores");
        float[] all = ClusteredData.Generate(count + 1000, dimension, clusters, 0.2f, seed: 101);
        float[] data = all.AsSpan(0, count * d).ToArray();
        float[] queries = all.AsSpan(count * d, QueryCount * d).ToArray();
        all = [];
        long[] ids = Enumerable.Range(0, count).Select(i => (long)i).ToArray();

        var watch = Stopwatch.StartNew();
        using var exact = new ExactIndex(d, DistanceMetric.SquaredEuclidean);
        exact.AddRange(ids, data);
        exact.Compact();
        double exactBuild = watch.Elapsed.TotalSeconds;
        double exactBefore = SingleThreadQps(exact, queries, d, null, out long[][] truth);
        var rows = new List<(string Name, double Build, double Bytes, int Scanned, string Rescored, double Recall, double Qps)>
        {
            ("exact, float32", exactBuild, exact.MemoryBytes / (double)count, d * sizeof(float), "–", 1.0, exactBefore),
        };

        using (ExactIndex codes = Build(data, ids, d, 0, out double build))
        {
            double qps = SingleThreadQps(codes, queries, d, null, out long[][] found);
            rows.Add(("exact, 8-bit", build, codes.MemoryBytes / (double)count, ScalarBytes(d), "–", Recall.AtK(truth, found, K), qps));
        }

        using (ExactIndex kept = Build(data, ids, d, 50, out double build))
        {
            foreach (int depth in new[] { 0, 10, 20, 50, 100 })
            {
                double qps = SingleThreadQps(kept, queries, d, new SearchOptions { RescoreDepth = depth }, out long[][] found);
                rows.Add(("exact, 8-bit + full vectors", build, kept.MemoryBytes / (double)count, ScalarBytes(d), depth == 0 ? "no" : depth.ToString(CultureInfo.InvariantCulture), Recall.AtK(truth, found, K), qps));
            }
        }

        double exactAfter = SingleThreadQps(exact, queries, d, null, out _);
        double reference = Math.Max(exactBefore, exactAfter);
        Console.WriteLine();
        Console.WriteLine("| index | train + build | bytes/vector in memory | bytes/vector scanned | re-scored | recall@10 | queries/s (1 thread) | × float32 |");
        Console.WriteLine("|---|---:|---:|---:|---:|---:|---:|---:|");
        foreach (var row in rows)
        {
            Console.WriteLine(string.Create(CultureInfo.InvariantCulture,
                $"| {row.Name} | {row.Build:F1} s | {row.Bytes:F0} | {row.Scanned} | {row.Rescored} | {row.Recall:F4} | {row.Qps:F1} | {row.Qps / reference:F2} |"));
        }

        Console.WriteLine();
        Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"float32 exact index: {exactBefore:F1} queries/s before the 8-bit runs, {exactAfter:F1} after; the × float32 column divides by the faster. Recall is against the float32 exact index's answers (ties by id)."));
        Console.WriteLine($"process peak working set {Process.GetCurrentProcess().PeakWorkingSet64 / 1048576.0:F0} MiB");
    }

    private static int ScalarBytes(int d) => (d + 15) / 16 * 16;

    private static ExactIndex Build(float[] data, long[] ids, int d, int depth, out double seconds)
    {
        var watch = Stopwatch.StartNew();
        var index = new ExactIndex(d, DistanceMetric.SquaredEuclidean, new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = depth });
        index.Train(data);
        index.AddRange(ids, data);
        index.Compact();
        seconds = watch.Elapsed.TotalSeconds;
        return index;
    }

    private static double SingleThreadQps(IVectorIndex index, float[] queries, int d, SearchOptions? options, out long[][] found)
    {
        int n = queries.Length / d;
        var hits = new SearchHit[K];
        found = new long[n][];
        for (int q = 0; q < n; q++)
        {
            int written = index.Search(queries.AsSpan(q * d, d), hits, options);
            found[q] = [.. hits.AsSpan(0, written).ToArray().Select(h => h.Id)];
        }

        double best = 0;
        for (int pass = 0; pass < 3; pass++)
        {
            var watch = Stopwatch.StartNew();
            for (int q = 0; q < n; q++)
            {
                index.Search(queries.AsSpan(q * d, d), hits, options);
            }

            best = Math.Max(best, n / watch.Elapsed.TotalSeconds);
        }

        return best;
    }
}
