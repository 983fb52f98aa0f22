using System.Diagnostics;
using VectorKit.Distance;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.IO;
using VectorKit.Persistence;
using VectorKit.Tests.TestData;

namespace VectorKit.Benchmarks.Indexes;

/// <summary>
/// A console harness (not BenchmarkDotNet, because each row needs a recall beside its throughput): builds the graph
/// index on 2 threads, then measures single-thread queries/s at several search widths with recall@10 against exact
/// ground truth, and the exact index's single-thread queries/s on the same queries in the same run. The machine may
/// be shared, so every throughput is the best of several timed passes (after an untimed one): interference only
/// ever slows a pass down. With <c>withCodes</c>, the same data also goes into a graph under 8-bit codes, and a second
/// table sets it beside the float32 graph at each width (their timed passes alternating, so both see the same load),
/// without and with exact re-scoring, and the fastest setting of each reaching each of several recalls.
/// </summary>
public static class GraphSweep
{
    private const int K = 10;

    // Re-scoring depths of the 8-bit graph in the comparison: none, twice k, ten times k (common practice).
    private static readonly int[] RescoreDepths = [0, 20, 100];

    // Recalls at which the cheapest settings of the two graphs are compared.
    private static readonly double[] RecallTargets = [0.90, 0.95, 0.98, 0.99];

    // Rows the 8-bit graph's ranges are trained on (the first ones of the base).
    private const int TrainingRows = 20_000;

    /// <summary>Fashion-MNIST: the 60,000 training images as the base, the first 1,000 test images as queries.</summary>
    public static void RunFashionMnist(string directory, bool withCodes = false)
    {
        VectorSet train = IdxFile.ReadVectors(Path.Combine(directory, "train-images-idx3-ubyte.gz"));
        VectorSet test = IdxFile.ReadVectors(Path.Combine(directory, "t10k-images-idx3-ubyte.gz"));
        int d = train.Dimension;
        Console.WriteLine($"Fashion-MNIST: {train.Count} × {d}, squared L2, 1000 queries");
        Sweep(train.Data, d, test.Data.AsSpan(0, 1000 * d).ToArray(), exactQueries: 1000, [10, 16, 24, 32, 48, 64, 96, 128, 256], withCodes);
    }

    /// <summary>
    /// The repository's seeded clustered generator: <paramref name="count"/> × <paramref name="dimension"/>, one cluster
    /// per 100 items (spread 0.2 around centres uniform in [−1, 1]ᵈ), 1,000 queries: the generator's next 1,000 rows,
    /// so from the same clusters; the exact index is timed on the first 200 of them (a full scan per query).
    /// </summary>
    public static void RunClustered(int count, int dimension, bool withCodes = false, string? cache = null)
    {
        s_cache = cache;
        int clusters = Math.Max(1, count / 100);
        Console.WriteLine($"clustered synthetic: {count} × {dimension}, {clusters} clusters, spread 0.2, squared L2, 1000 queries");
        // The queries are the generator's next 1,000 rows, from the same cluster centres as the data (another seed would
        // draw new centres, and every query would then lie far from every cluster).
        float[] all = ClusteredData.Generate(count + 1000, dimension, clusters, 0.2f, seed: 101);
        float[] data = all.AsSpan(0, count * dimension).ToArray();
        float[] queries = all.AsSpan(count * dimension).ToArray();
        Sweep(data, dimension, queries, exactQueries: 200, [10, 12, 16, 20, 24, 28, 32, 40, 48, 64, 128, 256, 512], withCodes);
    }

    // A folder where built graphs are saved and from which later runs load them (to compare search code on the same graphs).
    private static string? s_cache;

    private static void Sweep(float[] data, int d, float[] queries, int exactQueries, int[] widths, bool withCodes)
    {
        int count = data.Length / d;
        int queryCount = queries.Length / d;
        long[] ids = Enumerable.Range(0, count).Select(i => (long)i).ToArray();
        NeighborTable truth;
        double exactQps;
        using (var exact = new ExactIndex(d, DistanceMetric.SquaredEuclidean))
        {
            exact.AddRange(ids, data);
            truth = GroundTruth.Compute(exact, queries, K);
            exactQps = SingleThreadQps(exact, queries.AsSpan(0, exactQueries * d).ToArray(), d, null, timedPasses: 2, out _);
        }

        long before = GC.GetTotalMemory(forceFullCollection: true);
        var watch = Stopwatch.StartNew();
        using GraphIndex graph = Cached(count, d, "float32", () =>
        {
            var built = new GraphIndex(d, DistanceMetric.SquaredEuclidean, new GraphIndexOptions { MaxDegreeOfParallelism = 2 });
            built.AddRange(ids, data);
            return built;
        });
        watch.Stop();
        Console.WriteLine(
            $"build: {count} vectors × {d} on 2 threads in {watch.Elapsed.TotalSeconds:F1} s; {graph.MemoryBytes / (double)count:F0} bytes/vector " +
            $"({d * 4} of them the vector); index {graph.MemoryBytes / 1048576.0:F0} MiB; process peak working set {Process.GetCurrentProcess().PeakWorkingSet64 / 1048576.0:F0} MiB; " +
            $"managed heap grew {(GC.GetTotalMemory(forceFullCollection: true) - before) / 1048576.0:F0} MiB");
        Console.WriteLine($"exact index: {exactQps:F1} queries/s (single thread, {exactQueries} queries)");
        Console.WriteLine("width  recall@10  queries/s  × exact");
        List<long[]> expected = Enumerable.Range(0, queryCount).Select(q => truth[q].ToArray()).ToList();
        var floatRows = new (double Recall, double Qps)[widths.Length];
        for (int w = 0; w < widths.Length; w++)
        {
            int width = widths[w];
            var options = new SearchOptions { SearchWidth = width };
            double qps = SingleThreadQps(graph, queries, d, options, timedPasses: 5, out long[][] found);
            double recall = Recall.AtK(expected, found, K);
            floatRows[w] = (recall, qps);
            Console.WriteLine($"{width,5}  {recall,9:F4}  {qps,9:F0}  {qps / exactQps,7:F1}");
        }

        if (withCodes)
        {
            CompareCodes(graph, data, d, ids, queries, expected, widths, floatRows, graph.MemoryBytes / (double)count, watch.Elapsed.TotalSeconds);
        }
    }

    // The 8-bit graph on the same data, beside the float32 rows already measured. One graph keeps the full vectors, so
    // it answers both with re-scoring (depth per search) and without (depth 0); its bytes per vector without them are its
    // memory less the full vectors' block (reserved for exactly `count` rows), which is what a graph built without
    // re-scoring holds: the graph itself does not depend on the full vectors. At every width the float32 graph and the
    // 8-bit graph at each depth take turns pass by pass (so all see the same load on a shared machine; these float32
    // figures replace the first table's), and the summary compares the cheapest setting of each reaching each recall.
    private static void CompareCodes(GraphIndex floatGraph, float[] data, int d, long[] ids, float[] queries, List<long[]> expected, int[] widths, (double Recall, double Qps)[] floatRows, double floatBytes, double floatBuildSeconds)
    {
        int count = ids.Length;
        var watch = Stopwatch.StartNew();
        double trainSeconds = 0;
        using GraphIndex codes = Cached(count, d, "8bit", () =>
        {
            var built = new GraphIndex(d, DistanceMetric.SquaredEuclidean, new GraphIndexOptions
            {
                MaxDegreeOfParallelism = 2,
                Encoding = VectorEncoding.Scalar8Bit,
                RescoreDepth = RescoreDepths[^1],
                InitialCapacity = count,
            });
            built.Train(data.AsSpan(0, Math.Min(count, TrainingRows) * d));
            trainSeconds = watch.Elapsed.TotalSeconds;
            built.AddRange(ids, data);
            return built;
        });
        watch.Stop();
        double withFull = codes.MemoryBytes / (double)count;
        double codesOnly = (codes.MemoryBytes - ((long)count * d * sizeof(float))) / (double)count;
        Console.WriteLine(
            $"8-bit graph: trained on {Math.Min(count, TrainingRows)} rows in {trainSeconds:F2} s, built in {watch.Elapsed.TotalSeconds - trainSeconds:F1} s on 2 threads " +
            $"(float32 graph: {floatBuildSeconds:F1} s); bytes/vector: float32 graph {floatBytes:F0}, 8-bit graph {codesOnly:F0} ({codes.CodeBytesPerVector} of them the code), " +
            $"8-bit graph + full vectors {withFull:F0}");
        Console.WriteLine($"| width | float32 recall@10 | float32 q/s | {string.Join(" | ", RescoreDepths.Select(depth => $"8-bit re-score {depth} recall@10 | q/s"))} |");
        Console.WriteLine($"|---:|---:|---:|{string.Concat(Enumerable.Repeat("---:|---:|", RescoreDepths.Length))}");
        var points = new List<(string Kind, int Width, int Depth, double Recall, double Qps)>();
        for (int w = 0; w < widths.Length; w++)
        {
            var floatOptions = new SearchOptions { SearchWidth = widths[w] };
            SearchOptions[] codeOptions = [.. RescoreDepths.Select(depth => new SearchOptions { SearchWidth = widths[w], RescoreDepth = depth })];
            SingleThreadQps(floatGraph, queries, d, floatOptions, timedPasses: 0, out _);
            var codeRecall = new double[codeOptions.Length];
            for (int c = 0; c < codeOptions.Length; c++)
            {
                SingleThreadQps(codes, queries, d, codeOptions[c], timedPasses: 0, out long[][] found);
                codeRecall[c] = Recall.AtK(expected, found, K);
            }

            double floatQps = 0;
            var codeQps = new double[codeOptions.Length];
            for (int pass = 0; pass < 5; pass++)
            {
                floatQps = Math.Max(floatQps, TimedPass(floatGraph, queries, d, floatOptions));
                for (int c = 0; c < codeOptions.Length; c++)
                {
                    codeQps[c] = Math.Max(codeQps[c], TimedPass(codes, queries, d, codeOptions[c]));
                }
            }

            floatRows[w] = (floatRows[w].Recall, floatQps);
            points.Add(("float32", widths[w], 0, floatRows[w].Recall, floatQps));
            for (int c = 0; c < codeOptions.Length; c++)
            {
                points.Add(("8-bit", widths[w], RescoreDepths[c], codeRecall[c], codeQps[c]));
            }

            Console.WriteLine($"| {widths[w]} | {floatRows[w].Recall:F4} | {floatQps:F0} | {string.Join(" | ", codeRecall.Select((r, c) => $"{r:F4} | {codeQps[c]:F0}"))} |");
        }

        Console.WriteLine();
        Console.WriteLine("| recall@10 at least | float32 graph: fastest setting | q/s | 8-bit graph: fastest setting | q/s | 8-bit ÷ float32 |");
        Console.WriteLine("|---:|---|---:|---|---:|---:|");
        foreach (double target in RecallTargets)
        {
            var f = points.Where(p => p.Kind == "float32" && p.Recall >= target).OrderByDescending(p => p.Qps).FirstOrDefault();
            var c = points.Where(p => p.Kind == "8-bit" && p.Recall >= target).OrderByDescending(p => p.Qps).FirstOrDefault();
            string Describe((string Kind, int Width, int Depth, double Recall, double Qps) p)
                => p.Kind is null ? "not reached" : p.Depth > 0 ? $"width {p.Width}, re-score {p.Depth} ({p.Recall:F4})" : $"width {p.Width} ({p.Recall:F4})";
            string ratio = f.Kind is null || c.Kind is null ? "–" : $"{c.Qps / f.Qps:F2}";
            Console.WriteLine($"| {target:F2} | {Describe(f)} | {f.Qps:F0} | {Describe(c)} | {c.Qps:F0} | {ratio} |");
        }
    }

    // Builds the graph, or loads the one an earlier run saved in the cache folder (then the build times printed are load times).
    private static GraphIndex Cached(int count, int d, string name, Func<GraphIndex> build)
    {
        if (s_cache is null)
        {
            return build();
        }

        string path = Path.Combine(s_cache, $"graph-{name}-{count}x{d}.vkx");
        if (File.Exists(path))
        {
            Console.WriteLine($"(loading {name} graph from {path}: build times below are load times)");
            return IndexFile.Load<GraphIndex>(path);
        }

        Directory.CreateDirectory(s_cache);
        GraphIndex graph = build();
        IndexFile.Save(graph, path);
        return graph;
    }

    private static double TimedPass(IVectorIndex index, float[] queries, int d, SearchOptions options)
    {
        int n = queries.Length / d;
        var hits = new SearchHit[K];
        var watch = Stopwatch.StartNew();
        for (int q = 0; q < n; q++)
        {
            index.Search(queries.AsSpan(q * d, d), hits, options);
        }

        return n / watch.Elapsed.TotalSeconds;
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
