using System.Diagnostics;
using System.Globalization;
using VectorKit.Distance;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.Indexes.InvertedFile;
using VectorKit.IO;
using VectorKit.Tests.TestData;

namespace VectorKit.Benchmarks.Indexes;

/// <summary>
/// Product codes plus exact re-scoring, with the full vectors kept in the index's memory versus read on demand from a
/// .npy file (<see cref="FileVectorSource"/>): recall@10 and single-thread queries/s side by side in one run, with the
/// bytes each variant holds in memory. The file is read once before timing, so it sits in the operating system's
/// page cache: this measures the cost of the positional reads and copies, not of a disk. Both indexes are trained
/// with the same seed, so they hold the same codes and return the same hits. Each throughput is the best of 3 timed
/// passes after an untimed one, the two variants alternating pass by pass.
/// </summary>
public static class RescoreSourceSweep
{
    private const int K = 10;
    private const int QueryCount = 1000;

    public static void Run(int count, int dimension, int lists, int productBytes)
    {
        int d = dimension;
        int clusters = Math.Max(1, count / 100);
        Console.WriteLine($"clustered synthetic: {count} × {d}, {clusters} clusters, spread 0.2, squared L2, {QueryCount} queries; {lists} lists, product codes {productBytes} B; {Environment.ProcessorCount} cores");
        float[] all = ClusteredData.Generate(count + QueryCount, d, clusters, 0.2f, seed: 101);
        float[] data = all.AsSpan(0, count * d).ToArray();
        float[] queries = all.AsSpan(count * d).ToArray();
        all = [];
        long[] ids = Enumerable.Range(0, count).Select(i => (long)i).ToArray();
        NeighborTable truth = GroundTruth.Compute(data, default, queries, d, K, DistanceMetric.SquaredEuclidean);
        List<long[]> truthRows = [.. Enumerable.Range(0, QueryCount).Select(q => truth[q].ToArray())];

        string directory = Path.Combine("BenchmarkDotNet.Artifacts", "rescore-source");
        Directory.CreateDirectory(directory);
        string path = Path.Combine(directory, string.Create(CultureInfo.InvariantCulture, $"clustered-{count}x{d}.npy"));
        NpyFile.Write(path, new VectorSet(data, d));
        long fileBytes = new FileInfo(path).Length;
        using (FileStream warm = File.OpenRead(path))
        {
            warm.CopyTo(Stream.Null); // into the page cache
        }

        using FileVectorSource file = FileVectorSource.OpenNpy(path);
        var inMemory = new InvertedFileOptions { ListCount = lists, MaxDegreeOfParallelism = 2, Encoding = VectorEncoding.ProductCodes, ProductCodeBytes = productBytes, RescoreDepth = 100 };
        var external = new InvertedFileOptions { ListCount = lists, MaxDegreeOfParallelism = 2, Encoding = VectorEncoding.ProductCodes, ProductCodeBytes = productBytes, RescoreDepth = 100, FullVectors = FullVectorLocation.ExternalSource };
        var watch = Stopwatch.StartNew();
        using var memoryIndex = new InvertedFileIndex(d, DistanceMetric.SquaredEuclidean, inMemory);
        memoryIndex.Train(data);
        memoryIndex.AddRange(ids, data);
        double buildMemory = watch.Elapsed.TotalSeconds;
        watch.Restart();
        using var fileIndex = new InvertedFileIndex(d, DistanceMetric.SquaredEuclidean, external, file);
        fileIndex.Train(data);
        fileIndex.AddRange(ids, data);
        double buildFile = watch.Elapsed.TotalSeconds;
        Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"train + build: {buildMemory:F0} s (in memory), {buildFile:F0} s (from file); .npy file {fileBytes / 1048576.0:F0} MiB, warm in the page cache"));
        Console.WriteLine();
        Console.WriteLine("| full vectors | lists probed | re-scored | recall@10 | queries/s (1 thread) | file ÷ memory throughput | bytes/vector in memory | same hits |");
        Console.WriteLine("|---|---:|---:|---:|---:|---:|---:|---:|");
        double memoryBytes = memoryIndex.MemoryBytes / (double)count;
        double fileBytesPerVector = fileIndex.MemoryBytes / (double)count;
        foreach (int probes in new[] { 8, 16 })
        {
            foreach (int depth in new[] { 50, 100, 200 })
            {
                var options = new SearchOptions { SearchWidth = probes, RescoreDepth = depth };
                long[][] foundMemory = Answers(memoryIndex, queries, d, options, out SearchHit[][] hitsMemory);
                long[][] foundFile = Answers(fileIndex, queries, d, options, out SearchHit[][] hitsFile);
                bool same = Enumerable.Range(0, QueryCount).All(q => hitsMemory[q].SequenceEqual(hitsFile[q]));
                double qpsMemory = 0, qpsFile = 0;
                for (int pass = 0; pass < 3; pass++)
                {
                    qpsMemory = Math.Max(qpsMemory, TimedPass(memoryIndex, queries, d, options));
                    qpsFile = Math.Max(qpsFile, TimedPass(fileIndex, queries, d, options));
                }

                Console.WriteLine(string.Create(CultureInfo.InvariantCulture,
                    $"| in memory | {probes} | {depth} | {Recall.AtK(truthRows, foundMemory, K):F4} | {qpsMemory:F0} | | {memoryBytes:F0} | |"));
                Console.WriteLine(string.Create(CultureInfo.InvariantCulture,
                    $"| .npy file (page cache) | {probes} | {depth} | {Recall.AtK(truthRows, foundFile, K):F4} | {qpsFile:F0} | {qpsFile / qpsMemory:F2} | {fileBytesPerVector:F0} | {(same ? "yes" : "NO")} |"));
            }
        }

        Console.WriteLine($"process peak working set {Process.GetCurrentProcess().PeakWorkingSet64 / 1048576.0:F0} MiB");
    }

    private static long[][] Answers(InvertedFileIndex index, float[] queries, int d, SearchOptions options, out SearchHit[][] hits)
    {
        var buffer = new SearchHit[K];
        var found = new long[QueryCount][];
        hits = new SearchHit[QueryCount][];
        for (int q = 0; q < QueryCount; q++)
        {
            int written = index.Search(queries.AsSpan(q * d, d), buffer, options);
            hits[q] = buffer.AsSpan(0, written).ToArray();
            found[q] = [.. hits[q].Select(h => h.Id)];
        }

        return found;
    }

    private static double TimedPass(InvertedFileIndex index, float[] queries, int d, SearchOptions options)
    {
        var buffer = new SearchHit[K];
        var watch = Stopwatch.StartNew();
        for (int q = 0; q < QueryCount; q++)
        {
            index.Search(queries.AsSpan(q * d, d), buffer, options);
        }

        return QueryCount / watch.Elapsed.TotalSeconds;
    }
}
