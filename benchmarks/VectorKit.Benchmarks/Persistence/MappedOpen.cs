using System.Diagnostics;
using System.Runtime.InteropServices;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Persistence;
using VectorKit.Tests.TestData;

namespace VectorKit.Benchmarks.Persistence;

/// <summary>
/// A console harness comparing <see cref="IndexFile.OpenMapped(string, MappedOpenOptions?, CancellationToken)"/> with <see cref="IndexFile.Load(string, IndexLoadOptions?, CancellationToken)"/>
/// on one exact index, inverted-file or graph file (default 1,000,000 × 128, cached under BenchmarkDotNet.Artifacts/storage; the
/// inverted file: 1,024 lists, 64-byte product codes, full vectors kept, 8 lists probed, re-scoring 50; the graph: default
/// options, float32 or 8-bit codes with full vectors kept and re-scoring 50): time to open,
/// time to the first query, single-thread queries/s after it, and the process's anonymous and file-backed resident
/// memory. Cold rounds first drop the file's pages from the page cache with posix_fadvise(DONTNEED) (this file only:
/// the machine is shared, so the system-wide drop_caches is not used); warm rounds run with the file cached. Rounds
/// alternate mapped and loaded; each figure is the median of the rounds. Mapped results must equal loaded results.
/// </summary>
public static class MappedOpen
{
    private const int DontNeed = 4;

    public static void Run(int count, int dimension, int queryCount, int rounds, string kind = "exact")
    {
        string folder = Path.Combine(Directory.GetCurrentDirectory(), "BenchmarkDotNet.Artifacts", "storage");
        Directory.CreateDirectory(folder);
        string path = Path.Combine(folder, kind switch
        {
            "ivf" => $"ivf-pq64-v4-{count}x{dimension}.vkx",
            "graph" => $"graph-v6-{count}x{dimension}.vkx",
            "graph-8bit" => $"graph-8bit-v6-{count}x{dimension}.vkx",
            _ => $"exact-v3-{count}x{dimension}.vkx",
        });

        // A graph cached in format version 5 is loaded and saved again (the same graph, with its upper-layer starts),
        // instead of being rebuilt; the old file stays, for opening it with older code.
        string previous = path.Replace("-v6-", "-v5-", StringComparison.Ordinal);
        if (!File.Exists(path) && previous != path && File.Exists(previous))
        {
            using IVectorIndex old = IndexFile.Load(previous);
            IndexFile.Save(old, path);
            Console.WriteLine($"saved {Path.GetFileName(previous)} again as {Path.GetFileName(path)}");
        }

        if (!File.Exists(path))
        {
            var build = Stopwatch.StartNew();
            using IVectorIndex built = kind switch
            {
                "ivf" => BuildInvertedFile(count, dimension),
                "graph" => BuildGraph(count, dimension, VectorEncoding.Float32),
                "graph-8bit" => BuildGraph(count, dimension, VectorEncoding.Scalar8Bit),
                _ => StorageLoad.BuildExact(count, dimension),
            };
            IndexFile.Save(built, path);
            Console.WriteLine($"built and saved in {build.Elapsed.TotalSeconds:F0} s");
        }

        string described = kind switch
        {
            "ivf" => "inverted file (1,024 lists, 64-byte product codes, full vectors kept; 8 probed, re-scoring 50)",
            "graph" => "graph (float32, default options)",
            "graph-8bit" => "graph (8-bit codes, full vectors kept, re-scoring 50, default options otherwise)",
            _ => "exact",
        };
        Console.WriteLine($"mapped open vs load: {described} {count} × {dimension}, file {new FileInfo(path).Length / 1e6:F0} MB, {queryCount} queries, k = 10, one thread; {Environment.ProcessorCount} cores; median of {rounds} rounds");
        float[] queries = ClusteredData.Generate(queryCount + 1, dimension, 50, 0.3f, seed: 5);
        var serial = new SearchOptions { MaxDegreeOfParallelism = 1 };

        // Compile the paths once on the real file, and check that both give the same answers.
        using (IVectorIndex mapped = IndexFile.OpenMapped(path))
        using (IVectorIndex loaded = IndexFile.Load(path))
        {
            for (int q = 0; q < Math.Min(queryCount, 20); q++)
            {
                ReadOnlySpan<float> query = queries.AsSpan(q * dimension, dimension);
                if (!mapped.Search(query, 10, serial).SequenceEqual(loaded.Search(query, 10, serial)))
                {
                    throw new InvalidOperationException($"query {q}: mapped and loaded results differ");
                }
            }
        }

        var results = new Dictionary<string, List<Figures>>();
        for (int round = 0; round < rounds; round++)
        {
            foreach (bool cold in new[] { true, false })
            {
                foreach (bool mappedOpen in round % 2 == 0 ? new[] { true, false } : new[] { false, true })
                {
                    string key = $"{(mappedOpen ? "mapped" : "loaded")} {(cold ? "cold" : "warm")}";
                    if (cold)
                    {
                        DropFromCache(path);
                    }
                    else
                    {
                        WarmCache(path);
                    }

                    Figures figures = Measure(path, mappedOpen, queries, dimension, queryCount, serial);
                    (results.TryGetValue(key, out List<Figures>? list) ? list : results[key] = []).Add(figures);
                }
            }
        }

        Console.WriteLine("| opening | page cache | open | first query | queries/s after it | queries/s, same queries again | anonymous RSS added | file RSS added |");
        Console.WriteLine("|---|---|---|---|---|---|---|---|");
        foreach ((string key, List<Figures> list) in results)
        {
            string[] parts = key.Split(' ');
            Console.WriteLine(
                $"| {parts[0]} | {parts[1]} | {Median(list, f => f.OpenMs):F1} ms | {Median(list, f => f.FirstQueryMs):F1} ms | {Median(list, f => f.QueriesPerSecond):F1} | {Median(list, f => f.SecondPassPerSecond):F1} | {Median(list, f => f.AnonMb):F0} MB | {Median(list, f => f.FileMb):F0} MB |");
        }
    }

    private static Figures Measure(string path, bool mappedOpen, float[] queries, int dimension, int queryCount, SearchOptions serial)
    {
        GC.Collect();
        GC.WaitForPendingFinalizers();
        (long anon0, long file0) = Resident();
        var clock = Stopwatch.StartNew();
        using IVectorIndex index = mappedOpen ? IndexFile.OpenMapped(path) : IndexFile.Load(path);
        double open = clock.Elapsed.TotalMilliseconds;
        var hits = new SearchHit[10];
        index.Search(queries.AsSpan(queryCount * dimension, dimension), hits, serial);
        double first = clock.Elapsed.TotalMilliseconds - open;
        var rest = Stopwatch.StartNew();
        for (int q = 0; q < queryCount; q++)
        {
            index.Search(queries.AsSpan(q * dimension, dimension), hits, serial);
        }

        double qps = queryCount / rest.Elapsed.TotalSeconds;
        (long anon1, long file1) = Resident();

        // The same queries again: the pages they touch are now mapped into this process (no first-touch faults).
        var again = Stopwatch.StartNew();
        for (int q = 0; q < queryCount; q++)
        {
            index.Search(queries.AsSpan(q * dimension, dimension), hits, serial);
        }

        double second = queryCount / again.Elapsed.TotalSeconds;
        return new Figures(open, first, qps, second, (anon1 - anon0) / 1024.0, (file1 - file0) / 1024.0);
    }

    // Clustered rows (one cluster per 100), trained on 65,536 of them, added in chunks on every core.
    private static InvertedFileIndex BuildInvertedFile(int count, int dimension)
    {
        var index = new InvertedFileIndex(dimension, DistanceMetric.SquaredEuclidean, new InvertedFileOptions
        {
            ListCount = 1024,
            SearchWidth = 8,
            Encoding = VectorEncoding.ProductCodes,
            ProductCodeBytes = 64,
            RescoreDepth = 50,
        });
        float[] data = ClusteredData.Generate(count, dimension, Math.Max(1, count / 100), 0.2f, seed: 101);
        int stride = Math.Max(1, count / 65_536);
        int sampleRows = Math.Min(count, 65_536);
        var sample = new float[sampleRows * dimension];
        for (int r = 0; r < sampleRows; r++)
        {
            data.AsSpan(r * stride * dimension, dimension).CopyTo(sample.AsSpan(r * dimension));
        }

        index.Train(sample);
        const int chunk = 65_536;
        for (int start = 0; start < count; start += chunk)
        {
            int n = Math.Min(chunk, count - start);
            index.AddRange(Enumerable.Range(start, n).Select(i => (long)i).ToArray(), data.AsSpan(start * dimension, n * dimension));
        }

        return index;
    }

    // The same clustered rows as the inverted file's, added on every core; under 8-bit codes trained on a sample of them.
    private static GraphIndex BuildGraph(int count, int dimension, VectorEncoding encoding)
    {
        bool codes = encoding == VectorEncoding.Scalar8Bit;
        var index = new GraphIndex(dimension, DistanceMetric.SquaredEuclidean, new GraphIndexOptions { Encoding = encoding, RescoreDepth = codes ? 50 : 0 });
        float[] data = ClusteredData.Generate(count, dimension, Math.Max(1, count / 100), 0.2f, seed: 101);
        if (codes)
        {
            index.Train(data.AsSpan(0, Math.Min(count, 65_536) * dimension));
        }

        index.AddRange(Enumerable.Range(0, count).Select(i => (long)i).ToArray(), data);
        return index;
    }

    // The file's clean pages leave the page cache (no root needed); other files are untouched.
    internal static void DropFromCache(string path)
    {
        using var file = new FileStream(path, FileMode.Open, FileAccess.Read, FileShare.ReadWrite);
        int result = PosixFadvise((int)file.SafeFileHandle.DangerousGetHandle(), 0, 0, DontNeed);
        if (result != 0)
        {
            throw new IOException($"posix_fadvise failed with {result}");
        }
    }

    internal static void WarmCache(string path)
    {
        using var file = new FileStream(path, FileMode.Open, FileAccess.Read, FileShare.Read, 1 << 20);
        byte[] block = new byte[1 << 20];
        while (file.Read(block) > 0)
        {
        }
    }

    // RssAnon and RssFile of this process, in KiB.
    internal static (long Anon, long File) Resident()
    {
        long anon = 0, file = 0;
        foreach (string line in File.ReadLines("/proc/self/status"))
        {
            if (line.StartsWith("RssAnon:", StringComparison.Ordinal))
            {
                anon = long.Parse(line.Split([' ', '\t'], StringSplitOptions.RemoveEmptyEntries)[1], System.Globalization.CultureInfo.InvariantCulture);
            }
            else if (line.StartsWith("RssFile:", StringComparison.Ordinal))
            {
                file = long.Parse(line.Split([' ', '\t'], StringSplitOptions.RemoveEmptyEntries)[1], System.Globalization.CultureInfo.InvariantCulture);
            }
        }

        return (anon, file);
    }

    private static double Median(List<Figures> list, Func<Figures, double> pick)
    {
        double[] values = list.Select(pick).Order().ToArray();
        return values[values.Length / 2];
    }

    [DllImport("libc", EntryPoint = "posix_fadvise", SetLastError = true)]
    private static extern int PosixFadvise(int fd, long offset, long length, int advice);

    private readonly record struct Figures(double OpenMs, double FirstQueryMs, double QueriesPerSecond, double SecondPassPerSecond, double AnonMb, double FileMb);
}
