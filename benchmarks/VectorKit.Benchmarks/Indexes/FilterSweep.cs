using System.Diagnostics;
using VectorKit.Distance;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.IO;

namespace VectorKit.Benchmarks.Indexes;

/// <summary>
/// Where a filtered search should stop walking the graph and scan the passing items instead: for filters passing
/// 0.2 % to 20 % of Fashion-MNIST's 60,000 training images, the graph walk against the graph's exact scan of the
/// passing items, and the default choice between them, single thread, recall@10 against the exact filtered answer,
/// in one run.
/// A console harness, like <see cref="GraphSweep"/>, because each row needs a recall beside its throughput.
/// </summary>
public static class FilterSweep
{
    private const int K = 10;

    public static void RunFashionMnist(string directory)
    {
        VectorSet train = IdxFile.ReadVectors(Path.Combine(directory, "train-images-idx3-ubyte.gz"));
        VectorSet test = IdxFile.ReadVectors(Path.Combine(directory, "t10k-images-idx3-ubyte.gz"));
        int d = train.Dimension, n = train.Count;
        const int queryCount = 500;
        float[] queries = test.Data.AsSpan(0, queryCount * d).ToArray();
        long[] ids = Enumerable.Range(0, n).Select(i => (long)i).ToArray();
        using var exact = new ExactIndex(d, DistanceMetric.SquaredEuclidean);
        exact.AddRange(ids, train.Data);
        using var graph = new GraphIndex(d, DistanceMetric.SquaredEuclidean, new GraphIndexOptions { MaxDegreeOfParallelism = 2 });
        graph.AddRange(ids, train.Data);
        Console.WriteLine($"Fashion-MNIST: {n} × {d}, squared L2, {queryCount} queries, graph width {graph.Options.SearchWidth}, filter: id % m == 3");
        Console.WriteLine("  pass  walk recall@10  walk q/s  scan q/s  walk ÷ scan  default: recall@10  q/s");
        foreach (int modulus in new[] { 500, 200, 100, 50, 20, 10, 5 })
        {
            int m = modulus;
            var options = new SearchOptions { Filter = id => id % m == 3 };
            NeighborTable truth = NeighborTable.FromResults(exact.SearchBatch(queries, K, options));
            graph.FilteredScanFractionOverride = 0;
            double walk = Qps(graph, queries, d, options, out BatchSearchResults walked);
            graph.FilteredScanFractionOverride = 1;
            double scan = Qps(graph, queries, d, options, out _);
            graph.FilteredScanFractionOverride = null;
            double chosen = Qps(graph, queries, d, options, out BatchSearchResults found);
            Console.WriteLine(
                $"{100.0 / m,5:F1}%  {Recall.AtK(truth, walked, K),14:F4}  {walk,8:F0}  {scan,8:F0}  {walk / scan,11:F2}  " +
                $"{Recall.AtK(truth, found, K),17:F4}  {chosen,5:F0}");
        }
    }

    // Best of three timed passes after an untimed one (interference on a shared machine only slows a pass down).
    private static double Qps(IVectorIndex index, float[] queries, int d, SearchOptions options, out BatchSearchResults found)
    {
        int n = queries.Length / d;
        found = index.SearchBatch(queries, K, new SearchOptions { Filter = options.Filter, MaxDegreeOfParallelism = 1 });
        var hits = new SearchHit[K];
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
