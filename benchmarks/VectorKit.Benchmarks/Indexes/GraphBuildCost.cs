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
/// A console harness for the graph index's build cost against its floor: an insert is about one search at the build
/// width plus neighbour selection, so (build time on one thread) ÷ (N × one search at the build width) says how much
/// the build spends beyond its searches. Builds on one and on two threads alternate, each round in the same process,
/// and each figure is the fastest of its rounds (interference on a shared machine only ever slows a build down). The
/// search time is measured on the one-thread build, single-threaded, at the build width and top 10, fastest of 5 passes
/// after an untimed one; recall@10 at the default search width is printed for both builds beside it.
/// </summary>
public static class GraphBuildCost
{
    private const int K = 10;
    private const int QueryCount = 1000;

    /// <summary>The seeded clustered generator (one cluster per 100 items, spread 0.2), queries its next 1,000 rows.</summary>
    public static void RunClustered(int count, int dimension, int rounds)
    {
        float[] all = ClusteredData.Generate(count + QueryCount, dimension, Math.Max(1, count / 100), 0.2f, seed: 101);
        Console.WriteLine($"clustered synthetic: {count} × {dimension}, {Math.Max(1, count / 100)} clusters, spread 0.2, squared L2");
        Run(all.AsSpan(0, count * dimension).ToArray(), dimension, all.AsSpan(count * dimension).ToArray(), rounds);
    }

    /// <summary>Fashion-MNIST: the 60,000 training images, the first 1,000 test images as queries.</summary>
    public static void RunFashionMnist(string directory, int rounds)
    {
        VectorSet train = IdxFile.ReadVectors(Path.Combine(directory, "train-images-idx3-ubyte.gz"));
        VectorSet test = IdxFile.ReadVectors(Path.Combine(directory, "t10k-images-idx3-ubyte.gz"));
        Console.WriteLine($"Fashion-MNIST: {train.Count} × {train.Dimension}, squared L2");
        Run(train.Data, train.Dimension, test.Data.AsSpan(0, QueryCount * train.Dimension).ToArray(), rounds);
    }

    private static void Run(float[] data, int d, float[] queries, int rounds)
    {
        int count = data.Length / d;
        long[] ids = Enumerable.Range(0, count).Select(i => (long)i).ToArray();
        List<long[]> expected;
        using (var exact = new ExactIndex(d, DistanceMetric.SquaredEuclidean))
        {
            exact.AddRange(ids, data);
            NeighborTable truth = GroundTruth.Compute(exact, queries, K);
            expected = Enumerable.Range(0, QueryCount).Select(q => truth[q].ToArray()).ToList();
        }

        var defaults = new GraphIndexOptions();
        Console.WriteLine(
            $"links per node {defaults.LinksPerNode}, build width {defaults.BuildWidth}, default search width {defaults.SearchWidth}; " +
            $"{rounds} rounds of (1 thread, 2 threads), fastest of each; {Environment.ProcessorCount} cores seen by the process");
        double[] best = [double.MaxValue, double.MaxValue];
        double searchSeconds = 0, recallOne = 0, recallTwo = 0;
        for (int round = 0; round < rounds; round++)
        {
            for (int t = 0; t < 2; t++)
            {
                int threads = t + 1;
                GC.Collect();
                using var graph = new GraphIndex(d, DistanceMetric.SquaredEuclidean, new GraphIndexOptions { MaxDegreeOfParallelism = threads, InitialCapacity = count });
                TimeSpan cpuBefore = Process.GetCurrentProcess().TotalProcessorTime;
                long allocatedBefore = GC.GetTotalAllocatedBytes(precise: true);
                var watch = Stopwatch.StartNew();
                graph.AddRange(ids, data);
                watch.Stop();
                double cpu = (Process.GetCurrentProcess().TotalProcessorTime - cpuBefore).TotalSeconds;
                long allocated = GC.GetTotalAllocatedBytes(precise: true) - allocatedBefore;
                double seconds = watch.Elapsed.TotalSeconds;
                best[t] = Math.Min(best[t], seconds);
                double recall = Recall.AtK(expected, Search(graph, queries, d, defaults.SearchWidth, timedPasses: 0, out _), K);

                // CPU seconds beside wall seconds: on a shared machine a second thread may get no more CPU than one
                // (the scheduler shares it between sessions), so equal CPU time on both says the parallel build wastes
                // nothing on contention even when the wall clock cannot show a speed-up.
                Console.WriteLine(
                    $"round {round + 1}: {threads} thread(s) {seconds:F2} s wall, {cpu:F2} s CPU, {allocated / (double)count:F0} bytes allocated per insert, " +
                    $"recall@10 at width {defaults.SearchWidth} {recall:F4}");
                if (threads == 1)
                {
                    recallOne = recall;
                    if (round == rounds - 1)
                    {
                        Search(graph, queries, d, defaults.BuildWidth, timedPasses: 5, out searchSeconds);
                    }
                }
                else
                {
                    recallTwo = recall;
                }
            }
        }

        double ratio = best[0] / (count * searchSeconds);
        Console.WriteLine("| N × d | build, 1 thread | build, 2 threads | speed-up | one search at build width (1 thread) | build ÷ (N × search) | recall@10 (1 / 2 threads) |");
        Console.WriteLine("|---|---|---|---|---|---|---|");
        Console.WriteLine(
            $"| {count:N0} × {d} | {best[0]:F2} s | {best[1]:F2} s | {best[0] / best[1]:F2} | {searchSeconds * 1e6:F1} µs | {ratio:F2} | {recallOne:F4} / {recallTwo:F4} |");
    }

    // Single-thread searches of every query; returns the ids found and (when timed) the fastest pass's seconds per search.
    private static long[][] Search(GraphIndex graph, float[] queries, int d, int width, int timedPasses, out double secondsPerSearch)
    {
        var options = new SearchOptions { SearchWidth = width };
        var hits = new SearchHit[K];
        var found = new long[QueryCount][];
        for (int q = 0; q < QueryCount; q++)
        {
            int written = graph.Search(queries.AsSpan(q * d, d), hits, options);
            found[q] = hits.AsSpan(0, written).ToArray().Select(h => h.Id).ToArray();
        }

        secondsPerSearch = double.MaxValue;
        for (int pass = 0; pass < timedPasses; pass++)
        {
            var watch = Stopwatch.StartNew();
            for (int q = 0; q < QueryCount; q++)
            {
                graph.Search(queries.AsSpan(q * d, d), hits, options);
            }

            secondsPerSearch = Math.Min(secondsPerSearch, watch.Elapsed.TotalSeconds / QueryCount);
        }

        return found;
    }
}
