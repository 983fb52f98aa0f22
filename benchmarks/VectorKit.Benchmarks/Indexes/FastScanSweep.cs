using System.Diagnostics;
using System.Globalization;
using VectorKit.Distance;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.InvertedFile;
using VectorKit.IO;
using VectorKit.Tests.TestData;

namespace VectorKit.Benchmarks.Indexes;

/// <summary>
/// The inverted file with product codes in the byte layout (float table look-ups) against the four-bit fast-scan
/// layout at the same bytes per vector, both re-scoring from full vectors in memory, in one process: recall@10 against
/// exact ground truth and single-thread queries/s for every lists-probed × re-scoring-depth setting, then for each
/// layout the fastest setting reaching the recall target and the ratio of the two. Throughput is the best of 3 timed
/// passes after an untimed one (interference on a shared machine only slows a pass down); the two layouts are timed
/// alternately setting by setting.
/// </summary>
public static class FastScanSweep
{
    private const int K = 10;
    private const double Target = 0.95;

    /// <summary>Fashion-MNIST: 60,000 training images, the first 1,000 test images as queries.</summary>
    public static void RunFashionMnist(string directory, int lists, int codeBytes)
    {
        VectorSet train = IdxFile.ReadVectors(Path.Combine(directory, "train-images-idx3-ubyte.gz"));
        VectorSet test = IdxFile.ReadVectors(Path.Combine(directory, "t10k-images-idx3-ubyte.gz"));
        int d = train.Dimension;
        Console.WriteLine($"Fashion-MNIST: {train.Count} × {d}, squared L2, 1000 queries; {lists} lists; {codeBytes} code bytes per vector; {Environment.ProcessorCount} cores");
        Run(train.Data, d, test.Data.AsSpan(0, 1000 * d).ToArray(), lists, codeBytes, [1, 2, 4, 8, 16, 32], [20, 50, 100, 200]);
    }

    /// <summary>The seeded clustered generator (as inverted-file-sweep): one cluster per 100 items, queries from the same clusters.</summary>
    public static void RunClustered(int count, int dimension, int lists, int codeBytes)
    {
        int clusters = Math.Max(1, count / 100);
        Console.WriteLine($"clustered synthetic: {count} × {dimension}, {clusters} clusters, spread 0.2, squared L2, 1000 queries; {lists} lists; {codeBytes} code bytes per vector; {Environment.ProcessorCount} cores");
        float[] all = ClusteredData.Generate(count + 1000, dimension, clusters, 0.2f, seed: 101);
        float[] data = all.AsSpan(0, count * dimension).ToArray();
        float[] queries = all.AsSpan(count * dimension).ToArray();
        all = [];
        Run(data, dimension, queries, lists, codeBytes, [1, 2, 3, 4, 6, 8, 16], [10, 20, 30, 50, 100]);
    }

    private static void Run(float[] data, int d, float[] queries, int lists, int codeBytes, int[] probes, int[] depths)
    {
        int count = data.Length / d;
        int queryCount = queries.Length / d;
        long[] ids = Enumerable.Range(0, count).Select(i => (long)i).ToArray();
        var clock = Stopwatch.StartNew();
        NeighborTable truth;
        using (var exact = new ExactIndex(d, DistanceMetric.SquaredEuclidean))
        {
            exact.AddRange(ids, data);
            truth = GroundTruth.Compute(exact, queries, K);
        }

        List<long[]> truthRows = [.. Enumerable.Range(0, queryCount).Select(q => truth[q].ToArray())];
        Console.WriteLine($"ground truth: {clock.Elapsed.TotalSeconds:F0} s");
        using InvertedFileIndex bytes = Build(data, ids, d, lists, codeBytes, ProductCodeLayout.BytePerSubspace, out string bytesBuild);
        using InvertedFileIndex fast = Build(data, ids, d, lists, codeBytes, ProductCodeLayout.FourBitFastScan, out string fastBuild);
        Console.WriteLine($"built: byte layout {bytesBuild}; fast scan {fastBuild}");
        Console.WriteLine();
        Console.WriteLine("| lists probed | re-scored | byte layout recall@10 | byte layout queries/s | fast scan recall@10 | fast scan queries/s |");
        Console.WriteLine("|---:|---:|---:|---:|---:|---:|");
        (double Qps, string Setting, double Recall) bestBytes = (0, "none", 0), bestFast = (0, "none", 0);
        foreach (int probe in probes)
        {
            foreach (int depth in depths)
            {
                var search = new SearchOptions { SearchWidth = probe, RescoreDepth = depth };
                double bytesQps = InvertedFileSweep.SingleThreadQps(bytes, queries, d, search, timedPasses: 3, out long[][] bytesFound);
                double fastQps = InvertedFileSweep.SingleThreadQps(fast, queries, d, search, timedPasses: 3, out long[][] fastFound);
                double bytesRecall = Recall.AtK(truthRows, bytesFound, K);
                double fastRecall = Recall.AtK(truthRows, fastFound, K);
                Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"| {probe} | {depth} | {bytesRecall:F4} | {bytesQps:F0} | {fastRecall:F4} | {fastQps:F0} |"));
                string setting = string.Create(CultureInfo.InvariantCulture, $"{probe} lists, {depth} re-scored");
                if (bytesRecall >= Target && bytesQps > bestBytes.Qps)
                {
                    bestBytes = (bytesQps, setting, bytesRecall);
                }

                if (fastRecall >= Target && fastQps > bestFast.Qps)
                {
                    bestFast = (fastQps, setting, fastRecall);
                }
            }
        }

        Console.WriteLine();
        Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"fastest at recall@10 ≥ {Target}: byte layout {bestBytes.Qps:F0} queries/s ({bestBytes.Setting}, recall {bestBytes.Recall:F4}); fast scan {bestFast.Qps:F0} queries/s ({bestFast.Setting}, recall {bestFast.Recall:F4}); ratio {(bestBytes.Qps > 0 ? bestFast.Qps / bestBytes.Qps : double.NaN):F2}"));
        Console.WriteLine($"process peak working set {Process.GetCurrentProcess().PeakWorkingSet64 / 1048576.0:F0} MiB");
    }

    private static InvertedFileIndex Build(float[] data, long[] ids, int d, int lists, int codeBytes, ProductCodeLayout layout, out string took)
    {
        var watch = Stopwatch.StartNew();
        var index = new InvertedFileIndex(d, DistanceMetric.SquaredEuclidean, new InvertedFileOptions
        {
            ListCount = lists,
            MaxDegreeOfParallelism = 2,
            Encoding = VectorEncoding.ProductCodes,
            ProductCodeBytes = codeBytes,
            ProductCodeLayout = layout,
            RescoreDepth = 100,
        });
        index.Train(data);
        double train = watch.Elapsed.TotalSeconds;
        index.AddRange(ids, data);
        took = string.Create(CultureInfo.InvariantCulture, $"{watch.Elapsed.TotalSeconds:F0} s ({train:F0} s training), {index.MemoryBytes / (double)ids.Length:F0} B/vector in memory");
        return index;
    }
}
