using System.Diagnostics;
using VectorKit.Distance;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.IO;

namespace VectorKit.Benchmarks.Indexes;

/// <summary>
/// A console harness (not BenchmarkDotNet, because each row needs a recall beside its throughput): builds the graph
/// index on Fashion-MNIST's 60,000 training images on 2 threads, then measures single-thread queries/s over the
/// first 1,000 test images at several search widths with recall@10 against exact ground truth, and the exact
/// index's single-thread queries/s on the same queries in the same run.
/// </summary>
public static class GraphSweep
{
    public static void Run(string directory)
    {
        VectorSet train = IdxFile.ReadVectors(Path.Combine(directory, "train-images-idx3-ubyte.gz"));
        VectorSet test = IdxFile.ReadVectors(Path.Combine(directory, "t10k-images-idx3-ubyte.gz"));
        int d = train.Dimension;
        const int queryCount = 1000, k = 10;
        float[] queries = test.Data.AsSpan(0, queryCount * d).ToArray();
        long[] ids = Enumerable.Range(0, train.Count).Select(i => (long)i).ToArray();

        using var exact = new ExactIndex(d, DistanceMetric.SquaredEuclidean);
        exact.AddRange(ids, train.Data);
        NeighbourTable truth = GroundTruth.Compute(exact, queries, k);

        var watch = Stopwatch.StartNew();
        using var graph = new GraphIndex(d, DistanceMetric.SquaredEuclidean, new GraphIndexOptions { BuildParallelism = 2 });
        graph.AddRange(ids, train.Data);
        watch.Stop();
        Console.WriteLine($"build: {train.Count} vectors × {d} on 2 threads in {watch.Elapsed.TotalSeconds:F1} s; {graph.MemoryBytes / (double)graph.Count:F0} bytes/vector ({d * 4} of them the vector)");

        double exactQps = SingleThreadQps(exact, queries, d, k, null, out _);
        Console.WriteLine($"exact index: {exactQps:F1} queries/s (single thread)");
        Console.WriteLine("width  recall@10  queries/s  × exact");
        foreach (int width in new[] { 10, 16, 24, 32, 48, 64, 96, 128, 256 })
        {
            var options = new SearchOptions { SearchWidth = width };
            double qps = SingleThreadQps(graph, queries, d, k, options, out long[][] found);
            double recall = Recall.AtK(Enumerable.Range(0, queryCount).Select(q => truth[q].ToArray()).ToList(), found, k);
            Console.WriteLine($"{width,5}  {recall,9:F4}  {qps,9:F0}  {qps / exactQps,7:F1}");
        }
    }

    private static double SingleThreadQps(IVectorIndex index, float[] queries, int d, int k, SearchOptions? options, out long[][] found)
    {
        int n = queries.Length / d;
        var hits = new SearchHit[k];
        found = new long[n][];

        // One warm-up pass, then the timed pass.
        for (int pass = 0; pass < 2; pass++)
        {
            var watch = Stopwatch.StartNew();
            for (int q = 0; q < n; q++)
            {
                int written = index.Search(queries.AsSpan(q * d, d), hits, options);
                if (pass == 1)
                {
                    found[q] = hits.AsSpan(0, written).ToArray().Select(h => h.Id).ToArray();
                }
            }

            watch.Stop();
            if (pass == 1)
            {
                return n / watch.Elapsed.TotalSeconds;
            }
        }

        return 0;
    }
}
