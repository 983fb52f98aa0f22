using System.Diagnostics;
using System.Globalization;
using VectorKit.Distance;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Quantization;
using VectorKit.Tests.TestData;

namespace VectorKit.Benchmarks.Indexes;

/// <summary>
/// Product codes with and without the variance-balancing rotation, side by side in one run (console harness, recall
/// beside every throughput): Fashion-MNIST (784-d, 8/16/56-byte codes) and the seeded clustered set (128-d, 16/64-byte
/// codes). Per variant: training and build time on 2 threads, then recall@10 without re-scoring and with re-scoring of 50 and 100 candidates, and single-thread queries/s (best of 2
/// timed passes after an untimed one). The two variants of a code size are built and measured one after the other, so
/// machine load drifts affect both alike.
/// </summary>
public static class ProductRotationSweep
{
    private const int K = 10;

    public static void Run(int clusteredCount, int clusteredDimension)
    {
        Console.WriteLine($"{Environment.ProcessorCount} cores; load average at start: {LoadAverage()}");
        Console.WriteLine();
        Console.WriteLine("| data | code bytes | rotation | train + build, 2 threads | lists probed | re-scored | recall@10 | queries/s (1 thread) | rotated ÷ plain queries/s |");
        Console.WriteLine("|---|---:|---|---:|---:|---:|---:|---:|---:|");

        float[] train = TestData.Images(TestData.FashionTrainImages, 60_000, 1, out string trainSource);
        float[] test = TestData.Images(TestData.FashionTestImages, 1_000, 2, out string testSource);
        RunSet("Fashion-MNIST", train, test, 784, lists: 256, [8, 16, 56], [4, 16], $"Fashion-MNIST: 60,000 training images as the base ({trainSource}), 1,000 test images as queries ({testSource}), pixels / 255, squared L2, 256 lists");

        int clusters = Math.Max(1, clusteredCount / 100);
        float[] all = ClusteredData.Generate(clusteredCount + 1000, clusteredDimension, clusters, 0.2f, seed: 101);
        float[] data = all.AsSpan(0, clusteredCount * clusteredDimension).ToArray();
        float[] queries = all.AsSpan(clusteredCount * clusteredDimension).ToArray();
        all = [];
        int lists = (int)Math.Min(1024, Math.Max(16, 1 << (int)Math.Round(Math.Log2(Math.Sqrt(clusteredCount)))));
        RunSet("clustered", data, queries, clusteredDimension, lists, [16, 64], [2, 8], $"clustered synthetic: {clusteredCount} × {clusteredDimension} (seed 101, {clusters} clusters, spread 0.2; queries are the generator's next 1,000 rows), squared L2, {lists} lists");
        Console.WriteLine($"load average at end: {LoadAverage()}; process peak working set {Process.GetCurrentProcess().PeakWorkingSet64 / 1048576.0:F0} MiB");
    }

    private static void RunSet(string name, float[] data, float[] queries, int d, int lists, int[] codeSizes, int[] probes, string description)
    {
        int count = data.Length / d;
        long[] ids = Enumerable.Range(0, count).Select(i => (long)i).ToArray();
        NeighborTable truth;
        using (var exact = new ExactIndex(d, DistanceMetric.SquaredEuclidean))
        {
            exact.AddRange(ids, data);
            truth = GroundTruth.Compute(exact, queries, K);
        }

        List<long[]> truthRows = [.. Enumerable.Range(0, queries.Length / d).Select(q => truth[q].ToArray())];
        Console.WriteLine($"| {description} |||||||||");
        foreach (int bytes in codeSizes)
        {
            double[] plainQps = new double[probes.Length * 3];
            foreach (SubspaceRotation rotation in new[] { SubspaceRotation.None, SubspaceRotation.VarianceBalanced })
            {
                var options = new InvertedFileOptions
                {
                    ListCount = lists,
                    MaxDegreeOfParallelism = 2,
                    Encoding = VectorEncoding.ProductCodes,
                    ProductCodeBytes = bytes,
                    RescoreDepth = 100,
                    ProductCodeRotation = rotation,
                };
                var watch = Stopwatch.StartNew();
                using var index = new InvertedFileIndex(d, DistanceMetric.SquaredEuclidean, options);
                index.Train(data);
                double trainSeconds = watch.Elapsed.TotalSeconds;
                index.AddRange(ids, data);
                watch.Stop();
                string build = string.Create(CultureInfo.InvariantCulture, $"{watch.Elapsed.TotalSeconds:F1} s ({trainSeconds:F1} s training)");
                int column = 0;
                foreach (int probe in probes)
                {
                    foreach (int depth in new[] { 0, 50, 100 })
                    {
                        var search = new SearchOptions { SearchWidth = probe, RescoreDepth = depth };
                        double qps = InvertedFileSweep.SingleThreadQps(index, queries, d, search, timedPasses: 2, out long[][] found);
                        double recall = Recall.AtK(truthRows, found, K);
                        string ratio = "";
                        if (rotation == SubspaceRotation.None)
                        {
                            plainQps[column] = qps;
                        }
                        else
                        {
                            ratio = string.Create(CultureInfo.InvariantCulture, $"{qps / plainQps[column]:F2}");
                        }

                        column++;
                        Console.WriteLine(string.Create(CultureInfo.InvariantCulture,
                            $"| {name} | {bytes} | {(rotation == SubspaceRotation.None ? "none" : "variance-balanced")} | {build} | {probe} | {(depth == 0 ? "no" : depth.ToString(CultureInfo.InvariantCulture))} | {recall:F4} | {qps:F0} | {ratio} |"));
                        build = "″";
                    }
                }
            }
        }
    }

    private static string LoadAverage()
    {
        try
        {
            return File.ReadAllText("/proc/loadavg").Split(' ')[0];
        }
        catch (IOException)
        {
            return "unknown";
        }
    }
}
