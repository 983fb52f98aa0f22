using System.Diagnostics;
using System.Runtime.InteropServices;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Persistence;
using VectorKit.Tests.TestData;

namespace VectorKit.Benchmarks.Persistence;

/// <summary>
/// A console harness for load speed: saves an exact index (default 1,000,000 × 128) and a graph index (default
/// 200,000 × 128; files are cached under BenchmarkDotNet.Artifacts/storage because the graph takes minutes to build),
/// then, with both files warm in the page cache, times in alternation a plain read of each file into a freshly
/// allocated buffer of its size and a full <see cref="IndexFile.Load(string, IndexLoadOptions?, CancellationToken)"/>
/// of it. Each figure is the best of several rounds (interference only slows a round down); the ratio is load
/// throughput over plain-read throughput, both measured in this run. A loaded index must return exactly the saved
/// index's results for 100 queries (recall 1.0 against the original).
/// </summary>
public static unsafe class StorageLoad
{
    private const int Rounds = 7;
    private const int Block = 1 << 20;

    public static void Run(int exactCount, int graphCount, int dimension)
    {
        string folder = Path.Combine(Directory.GetCurrentDirectory(), "BenchmarkDotNet.Artifacts", "storage");
        Directory.CreateDirectory(folder);
        Console.WriteLine($"load throughput vs plain read, same run; {Environment.ProcessorCount} cores; files in {folder}");
        float[] queries = ClusteredData.Generate(100, dimension, 100, 0.2f, seed: 102);

        string exactPath = Path.Combine(folder, $"exact-{exactCount}x{dimension}.vkx");
        using (ExactIndex exact = BuildExact(exactCount, dimension))
        {
            var save = Stopwatch.StartNew();
            IndexFile.Save(exact, exactPath);
            Console.WriteLine($"exact {exactCount} × {dimension}: saved {Size(exactPath)} in {save.Elapsed.TotalSeconds:F2} s (atomic, flushed to disk)");
            Measure("exact", exactPath, exact, queries);
        }

        string graphPath = Path.Combine(folder, $"graph-{graphCount}x{dimension}.vkx");
        GraphIndex graph;
        if (File.Exists(graphPath))
        {
            graph = IndexFile.Load<GraphIndex>(graphPath);
            Console.WriteLine($"graph {graphCount} × {dimension}: cached file {Size(graphPath)}");
        }
        else
        {
            graph = new GraphIndex(dimension, DistanceMetric.SquaredEuclidean);
            float[] data = ClusteredData.Generate(graphCount, dimension, Math.Max(1, graphCount / 100), 0.2f, seed: 101);
            var build = Stopwatch.StartNew();
            graph.AddRange(Enumerable.Range(0, graphCount).Select(i => (long)i).ToArray(), data);
            Console.WriteLine($"graph {graphCount} × {dimension}: built in {build.Elapsed.TotalSeconds:F1} s");
            var save = Stopwatch.StartNew();
            IndexFile.Save(graph, graphPath);
            Console.WriteLine($"graph saved {Size(graphPath)} in {save.Elapsed.TotalSeconds:F2} s");
        }

        using (graph)
        {
            Measure("graph", graphPath, graph, queries);
        }
    }

    // Uniform rows in [-1, 1), ids 0..count-1, added in chunks (also the mapped-open benchmark's index).
    internal static ExactIndex BuildExact(int count, int dimension)
    {
        var random = new Random(7);
        var index = new ExactIndex(dimension, DistanceMetric.SquaredEuclidean);
        const int chunk = 65_536;
        var data = new float[chunk * dimension];
        var ids = new long[chunk];
        for (int start = 0; start < count; start += chunk)
        {
            int n = Math.Min(chunk, count - start);
            for (int i = 0; i < n * dimension; i++)
            {
                data[i] = (random.NextSingle() * 2) - 1;
            }

            for (int i = 0; i < n; i++)
            {
                ids[i] = start + i;
            }

            index.AddRange(ids.AsSpan(0, n), data.AsSpan(0, n * dimension));
        }

        return index;
    }

    private static void Measure(string label, string path, IVectorIndex original, float[] queries)
    {
        long bytes = new FileInfo(path).Length;
        byte* reused = (byte*)NativeMemory.AlignedAlloc((nuint)bytes, 64);
        PlainRead(path, bytes, reused);
        PlainRead(path, bytes, null);
        using (IndexFile.Load(path))
        {
            // Warm-up: page cache, JIT.
        }

        double bestRead = double.MaxValue, bestLoad = double.MaxValue, bestCopy = double.MaxValue;
        var reads = new List<double>();
        var loads = new List<double>();
        for (int round = 0; round < Rounds; round++)
        {
            GC.Collect();
            var watch = Stopwatch.StartNew();
            PlainRead(path, bytes, reused);
            bestCopy = Math.Min(bestCopy, watch.Elapsed.TotalSeconds);
            watch.Restart();
            PlainRead(path, bytes, null);
            double read = watch.Elapsed.TotalSeconds;
            GC.Collect();
            watch.Restart();
            IVectorIndex loaded = IndexFile.Load(path);
            double load = watch.Elapsed.TotalSeconds;
            loaded.Dispose();
            reads.Add(read);
            loads.Add(load);
            bestRead = Math.Min(bestRead, read);
            bestLoad = Math.Min(bestLoad, load);
        }

        NativeMemory.AlignedFree(reused);
        int identical = 0;
        using (IVectorIndex loaded = IndexFile.Load(path))
        {
            int d = original.Dimension;
            for (int q = 0; q < queries.Length / d; q++)
            {
                ReadOnlySpan<float> query = queries.AsSpan(q * d, d);
                identical += original.Search(query, 10).SequenceEqual(loaded.Search(query, 10)) ? 1 : 0;
            }
        }

        double gb = bytes / 1e9;
        Console.WriteLine(
            $"{label}: file {Size(path)}; plain read best {bestRead * 1000:F1} ms ({gb / bestRead:F2} GB/s), median {Median(reads) * 1000:F1} ms; "
            + $"load best {bestLoad * 1000:F1} ms ({gb / bestLoad:F2} GB/s), median {Median(loads) * 1000:F1} ms; "
            + $"ratio (load ÷ read throughput) best {bestRead / bestLoad:F2}, median {Median(reads) / Median(loads):F2}; "
            + $"top-10 identical to the saved index for {identical} of {queries.Length / original.Dimension} queries; "
            + $"(for reference: the read into an already-touched buffer, no page faults, best {bestCopy * 1000:F1} ms, {gb / bestCopy:F2} GB/s)");
    }

    // The baseline: the same file read front to back in 1 MiB blocks into a fresh 64-byte-aligned buffer of its size,
    // as any reader that keeps the data must allocate it (the loader allocates its storage the same way). With
    // `into` given, the read goes to that buffer instead (a reference without allocation costs).
    private static void PlainRead(string path, long bytes, byte* into)
    {
        byte* buffer = into != null ? into : (byte*)NativeMemory.AlignedAlloc((nuint)bytes, 64);
        try
        {
            using var file = new FileStream(path, FileMode.Open, FileAccess.Read, FileShare.Read, bufferSize: 0, FileOptions.SequentialScan);
            long at = 0;
            while (at < bytes)
            {
                int n = file.Read(new Span<byte>(buffer + at, (int)Math.Min(Block, bytes - at)));
                if (n == 0)
                {
                    break;
                }

                at += n;
            }
        }
        finally
        {
            if (into == null)
            {
                NativeMemory.AlignedFree(buffer);
            }
        }
    }

    private static double Median(List<double> values)
    {
        var sorted = values.Order().ToList();
        return sorted[sorted.Count / 2];
    }

    private static string Size(string path) => $"{new FileInfo(path).Length / (1024.0 * 1024.0):F1} MiB";
}
