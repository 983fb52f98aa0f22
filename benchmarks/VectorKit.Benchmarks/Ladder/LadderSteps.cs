using System.Diagnostics;
using System.Globalization;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;
using VectorKit.IO;
using VectorKit.Persistence;

namespace VectorKit.Benchmarks.Ladder;

/// <summary>
/// One step of one rung, run in its own process so its peak resident memory (VmHWM) is its own: ground truth with the
/// exact scan's speed, or a streamed build of one kind followed by a sweep of its search settings. Each writes a small
/// result file (<c>key\tvalue</c> lines, then <c>point\tsetting\trecall\tqueries/s</c> lines) that the ladder reads.
/// </summary>
internal static class LadderSteps
{
    public const int K = 10;
    private const int TruthBlockRows = 1_000_000;

    public static void Truth(string dataPath, string queryPath, string truthPath, string resultPath)
    {
        VectorSet queries = NpyOrFvecs(queryPath);
        int d = queries.Dimension;
        int q = queries.Count;
        var best = new List<SearchHit>[q];
        for (int i = 0; i < q; i++)
        {
            best[i] = new List<SearchHit>(2 * K);
        }

        using VectorReader reader = Open(dataPath);
        long count = reader.Count;
        int timed = count <= 100_000 ? 200 : count <= 1_000_000 ? 100 : 20;
        timed = Math.Min(timed, q);
        var block = new float[(int)Math.Min(TruthBlockRows, count) * d];
        long start = 0;
        double scanSeconds = 0;
        double scanCpuSeconds = 0;
        double addSeconds = 0;
        double bytesPerVector = 0;
        var hits = new SearchHit[K];
        var total = Stopwatch.StartNew();
        while (true)
        {
            int got = reader.ReadBlock(block);
            if (got == 0)
            {
                break;
            }

            long[] ids = new long[got];
            for (int i = 0; i < got; i++)
            {
                ids[i] = start + i;
            }

            var watch = Stopwatch.StartNew();
            using var exact = new ExactIndex(d, DistanceMetric.SquaredEuclidean);
            exact.AddRange(ids, block.AsSpan(0, got * d));
            addSeconds += watch.Elapsed.TotalSeconds;
            bytesPerVector = exact.MemoryBytes / (double)got;

            // The exact index's batch search gives each block's top 10; the blocks' lists merge by (distance, id).
            BatchSearchResults results = exact.SearchBatch(queries.Data.AsSpan(0, q * d), K);
            for (int i = 0; i < q; i++)
            {
                best[i].AddRange(results[i]);
                best[i].Sort();
                if (best[i].Count > K)
                {
                    best[i].RemoveRange(K, best[i].Count - K);
                }
            }

            // The single-thread scan, timed per block: the sum over blocks is one scan of every row.
            double cpuStart = ThreadCpuClock.Seconds();
            watch.Restart();
            for (int i = 0; i < timed; i++)
            {
                exact.Search(queries.Data.AsSpan(i * d, d), hits);
            }

            scanSeconds += watch.Elapsed.TotalSeconds;
            scanCpuSeconds += ThreadCpuClock.Seconds() - cpuStart;
            start += got;
            Console.Error.WriteLine($"truth: {start:N0} of {count:N0} rows, {total.Elapsed.TotalSeconds:F0} s");
        }

        using (var writer = new BinaryWriter(File.Create(truthPath)))
        {
            writer.Write(q);
            foreach (List<SearchHit> row in best)
            {
                for (int j = 0; j < K; j++)
                {
                    writer.Write(row[j].Id);
                }
            }
        }

        var result = new LadderResult
        {
            Kind = "exact",
            BuildSeconds = addSeconds,
            BytesPerVector = bytesPerVector,
            PeakResidentMiB = PeakResidentMiB(),
            Notes = count > TruthBlockRows ? $"scanned in blocks of {TruthBlockRows:N0} rows" : "one in-memory index",
        };
        result.Points.Add(new LadderPoint("full scan", 1.0, timed / scanSeconds, timed / scanCpuSeconds));
        result.Save(resultPath);
    }

    public static void BuildAndSweep(string kind, string dataPath, string queryPath, string truthPath, string resultPath, FileVectorReads reads, string? gridOverride = null, bool openMapped = false)
    {
        VectorSet queries = NpyOrFvecs(queryPath);
        long[][] truth = ReadTruth(truthPath);
        int d = queries.Dimension;
        long count;
        using (VectorReader reader = Open(dataPath))
        {
            count = reader.Count;
        }

        using FileVectorSource source = StreamingBuild.OpenFullVectors(dataPath, reads: reads);
        VectorIndex index;
        string settings;
        if (kind == "graph-8bit")
        {
            index = new GraphIndex(d, DistanceMetric.SquaredEuclidean, new GraphIndexOptions
            {
                Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = 50, FullVectors = FullVectorLocation.ExternalSource, MaxDegreeOfParallelism = 2,
            });
            settings = "8-bit codes, default links, full vectors re-scored from the data file";
        }
        else
        {
            int lists = Lists(count);
            bool fastScan = kind == "ivf-fastscan";

            // Fast scan: 4-bit codes, two per byte, so d / 2 bytes give one sub-space per dimension (16 levels each).
            index = new InvertedFileIndex(d, DistanceMetric.SquaredEuclidean, new InvertedFileOptions
            {
                ListCount = lists, Encoding = VectorEncoding.ProductCodes, ProductCodeBytes = d / 2, RescoreDepth = 100,
                ProductCodeLayout = fastScan ? ProductCodeLayout.FourBitFastScan : ProductCodeLayout.BytePerSubspace,
                FullVectors = FullVectorLocation.ExternalSource, MaxDegreeOfParallelism = 2,
            });
            settings = fastScan
                ? $"{lists} lists, {d / 2}-byte four-bit fast-scan codes ({d} sub-spaces of 16 codewords), full vectors re-scored from the data file"
                : $"{lists} lists, {d / 2}-byte product codes, full vectors re-scored from the data file";
        }

        // The built index is saved beside the result, so a later run sweeps it again (a changed search path, another
        // full-vector source) without rebuilding; the build's time and memory come from the first run's notes.
        string saved = Path.ChangeExtension(resultPath, ".index");
        string buildNotes = Path.ChangeExtension(resultPath, ".build");
        bool reuse = File.Exists(saved) && File.Exists(buildNotes);
        if (reuse)
        {
            index.Dispose();
            index = openMapped ? (VectorIndex)IndexFile.OpenMapped(saved) : (VectorIndex)IndexFile.Load(saved);
            Console.Error.WriteLine($"{kind}: {(openMapped ? "opened (mapped)" : "loaded")} the index built earlier from {saved}");
        }

        using (index)
        {
            index.AttachFullVectors(source);
            int sample = (int)Math.Min(count, kind == "graph-8bit" ? 100_000 : Math.Max(100_000, 40 * Lists(count)));
            using var memory = new LadderMemory();
            double buildSeconds;
            string memoryNote;
            long trainingRows;
            if (reuse)
            {
                string[] lines = File.ReadAllLines(buildNotes);
                buildSeconds = double.Parse(lines[0], CultureInfo.InvariantCulture);
                trainingRows = long.Parse(lines[1], CultureInfo.InvariantCulture);
                memoryNote = lines[2] + " (measured in the build's process; this sweep loaded the saved index)";
            }
            else
            {
                var watch = Stopwatch.StartNew();
                StreamingBuildReport report = StreamingBuild.Build(index, dataPath, new StreamingBuildOptions { SampleSize = sample }, new ConsoleProgress(kind, watch, memory));
                buildSeconds = watch.Elapsed.TotalSeconds;
                trainingRows = report.TrainingRows;
                memoryNote = memory.AfterBuild(index.MemoryBytes) + "; " + memory.Summary() + string.Create(CultureInfo.InvariantCulture, $"; peak resident after the build {PeakResidentMiB():F0} MiB");
                IndexFile.Save(index, saved);
            }

            memory.Stage("sweep");
            var result = new LadderResult
            {
                Kind = kind,
                BuildSeconds = buildSeconds,
                // A mapped index holds nothing in the managed heap: its footprint is the index file the page cache serves.
                BytesPerVector = (reuse && openMapped ? new FileInfo(saved).Length : index.MemoryBytes) / (double)index.Count,
                Notes = $"{settings} ({(reads == FileVectorReads.Mapped ? "mapped" : "positional reads")}); trained on {trainingRows:N0} strided rows; {memoryNote}"
                    + (reuse && openMapped ? "; the sweep opened the saved index mapped: bytes/vector is the index file's size" : ""),
            };
            Console.Error.WriteLine($"{kind}: {index.Count:N0} rows built in {buildSeconds:F0} s; {result.BytesPerVector:F0} bytes/vector");

            (int Width, int Depth)[] grid = gridOverride is not null
                ? [.. gridOverride.Split(',').Select(s => s.Split('/')).Select(p => (int.Parse(p[0], CultureInfo.InvariantCulture), int.Parse(p[1], CultureInfo.InvariantCulture)))]
                : kind switch
            {
                "graph-8bit" => [.. Grid([10, 16, 24, 32, 48, 64, 96, 128, 192, 256, 384, 512, 768, 1024], [0, 20, 50, 100])],
                "ivf-fastscan" => [.. Grid([1, 2, 4, 6, 8, 12, 16, 24, 32, 48, 64, 128], [10, 20, 30, 50, 100, 200])],
                _ => [.. Grid([1, 2, 4, 8, 16, 32, 64, 128], [0, 20, 50, 100, 200])],
            };
            var done = new HashSet<int>();
            var previous = new Dictionary<int, double>();
            foreach ((int width, int depth) in grid)
            {
                if (done.Contains(depth) && gridOverride is null)
                {
                    continue;
                }

                var options = new SearchOptions { SearchWidth = width, RescoreDepth = depth };
                (double recall, double qps, double cpuQps) = Measure(index, queries, truth, options);
                string setting = kind == "graph-8bit" ? $"width {width}" : $"{width} lists probed";
                setting += depth == 0 ? ", no re-scoring" : $", re-scoring {depth}";
                result.Points.Add(new LadderPoint(setting, recall, qps, cpuQps));
                Console.Error.WriteLine(string.Create(CultureInfo.InvariantCulture, $"{kind}: {setting}: recall@10 {recall:F4}, {qps:F0} queries/s, {cpuQps:F0} per CPU-second"));

                // A wider search only costs more: a depth is done once the higher target is met, once recall stops
                // rising (codes alone plateau below it), or once throughput is hopeless.
                bool flat = previous.TryGetValue(depth, out double before) && recall - before < 0.0005;
                if (recall >= 0.95 || flat || Math.Min(qps, cpuQps) < 20)
                {
                    done.Add(depth);
                }

                previous[depth] = recall;
            }

            if (kind != "graph-8bit" && result.Cheapest(0.90) is { } chosen)
            {
                (int probes, int depth) = ParseSetting(chosen.Setting);
                Console.Error.WriteLine(QueryProfile(index, source, queries, probes, depth));
            }

            Console.Error.WriteLine(memory.Summary());
            if (reuse)
            {
                result.PeakResidentMiB = double.Parse(File.ReadAllLines(buildNotes)[3], CultureInfo.InvariantCulture);
            }
            else
            {
                result.PeakResidentMiB = PeakResidentMiB();
                File.WriteAllLines(buildNotes, [F(buildSeconds), F(trainingRows), memoryNote, F(result.PeakResidentMiB)]);
            }

            result.Save(resultPath);
        }
    }

    private static string F(double value) => value.ToString("R", CultureInfo.InvariantCulture);

    // "8 lists probed, re-scoring 50" (or ", no re-scoring") back to its numbers.
    private static (int Probes, int Depth) ParseSetting(string setting)
    {
        string[] parts = setting.Split(", ");
        int probes = int.Parse(parts[0].Split(' ')[0], CultureInfo.InvariantCulture);
        int depth = parts[1].StartsWith("re-scoring ", StringComparison.Ordinal) ? int.Parse(parts[1]["re-scoring ".Length..], CultureInfo.InvariantCulture) : 0;
        return (probes, depth);
    }

    /// <summary>
    /// Where one query's time goes at a setting, from differences of single-thread timings on the same queries: one probe
    /// without re-scoring (centroid search + one list), the setting without re-scoring (+ the other lists), the setting
    /// itself (+ re-scoring), and the file's positional reads alone for the same number of random rows.
    /// </summary>
    private static string QueryProfile(VectorIndex index, FileVectorSource source, VectorSet queries, int probes, int depth)
    {
        // Thread CPU time: steadier than wall time on a shared machine, and the parts are differences of it.
        double one = 1e6 * SecondsPerQuery(index, queries, new SearchOptions { SearchWidth = 1, RescoreDepth = 0 }, 3).Cpu;
        double scan = 1e6 * SecondsPerQuery(index, queries, new SearchOptions { SearchWidth = probes, RescoreDepth = 0 }, 3).Cpu;
        double full = 1e6 * SecondsPerQuery(index, queries, new SearchOptions { SearchWidth = probes, RescoreDepth = depth }, 3).Cpu;
        double perList = probes > 1 ? (scan - one) / (probes - 1) : double.NaN;
        var random = new Random(5);
        var row = new float[queries.Dimension];
        const int reads = 20_000;
        double start = ThreadCpuClock.Seconds();
        for (int i = 0; i < reads; i++)
        {
            source.TryGetVector(random.NextInt64(source.Count), row);
        }

        double readMicroseconds = 1e6 * (ThreadCpuClock.Seconds() - start) / reads;
        return string.Create(CultureInfo.InvariantCulture,
            $"profile (thread CPU time) at {probes} probed, re-scoring {depth}: {full:F0} µs/query = centroid search + first list {one:F0} µs, {probes - 1} more lists {scan - one:F0} µs ({perList:F1} µs each), re-scoring {full - scan:F0} µs ({(full - scan) / Math.Max(1, depth):F2} µs per candidate; a random row read from the source alone {readMicroseconds:F2} µs)");
    }

    // Lists: the power of two nearest below 2√N, at most 4,096. Assigning every row to its list costs N × lists × d
    // multiply-adds, the bulk of a build at 10⁷ (5 × 10¹² at 4,096 lists); 8,192 lists would double it and break the
    // 45-minute budget on 2 shared cores, while a fast-scan probe of a 2,441-row list is cheap, so recall is bought with
    // more probes instead.
    public static int Lists(long count)
    {
        double target = 2 * Math.Sqrt(count);
        int lists = 16;
        while (lists * 2 <= target && lists < 4096)
        {
            lists *= 2;
        }

        return lists;
    }

    private static IEnumerable<(int, int)> Grid(int[] widths, int[] depths)
    {
        foreach (int w in widths)
        {
            foreach (int depth in depths)
            {
                yield return (w, depth);
            }
        }
    }

    /// <summary>
    /// Recall@10 over every query (an untimed pass that also warms the page cache), then single-thread queries/s by wall
    /// clock and per CPU-second of the searching thread, each the best of 2 passes.
    /// </summary>
    private static (double Recall, double Qps, double CpuQps) Measure(VectorIndex index, VectorSet queries, long[][] truth, SearchOptions options)
    {
        int d = queries.Dimension;
        int q = truth.Length;
        var hits = new SearchHit[K];
        long found = 0;
        for (int i = 0; i < q; i++)
        {
            int n = index.Search(queries.Data.AsSpan(i * d, d), hits, options);
            for (int j = 0; j < n; j++)
            {
                if (Array.IndexOf(truth[i], hits[j].Id) >= 0)
                {
                    found++;
                }
            }
        }

        (double wall, double cpu) = SecondsPerQuery(index, queries, options, 2);
        return (found / (double)(q * K), 1 / wall, 1 / cpu);
    }

    /// <summary>Best wall-clock and best thread-CPU seconds per query over <paramref name="passes"/> passes of every query.</summary>
    private static (double Wall, double Cpu) SecondsPerQuery(VectorIndex index, VectorSet queries, SearchOptions options, int passes)
    {
        int d = queries.Dimension;
        int q = queries.Count;
        var hits = new SearchHit[K];
        double wall = double.PositiveInfinity, cpu = double.PositiveInfinity;
        for (int pass = 0; pass < passes; pass++)
        {
            double cpuStart = ThreadCpuClock.Seconds();
            var watch = Stopwatch.StartNew();
            for (int i = 0; i < q; i++)
            {
                index.Search(queries.Data.AsSpan(i * d, d), hits, options);
            }

            wall = Math.Min(wall, watch.Elapsed.TotalSeconds / q);
            cpu = Math.Min(cpu, (ThreadCpuClock.Seconds() - cpuStart) / q);
        }

        return (wall, cpu);
    }

    /// <summary>The process's peak resident set (VmHWM in /proc/self/status), in MiB; NaN where that file does not exist.</summary>
    public static double PeakResidentMiB()
    {
        const string status = "/proc/self/status";
        if (!File.Exists(status))
        {
            return double.NaN;
        }

        foreach (string line in File.ReadLines(status))
        {
            if (line.StartsWith("VmHWM:", StringComparison.Ordinal))
            {
                string kb = line["VmHWM:".Length..].Trim().Split(' ')[0];
                return long.Parse(kb, CultureInfo.InvariantCulture) / 1024.0;
            }
        }

        return double.NaN;
    }

    private static VectorReader Open(string path)
        => path.EndsWith(".npy", StringComparison.Ordinal) ? NpyReader.Open(path) : VecsReader.Open(path, VecsElementType.Float32);

    internal static VectorSet NpyOrFvecs(string path)
        => path.EndsWith(".npy", StringComparison.Ordinal) ? NpyFile.ReadVectors(path) : VecsFile.ReadFvecs(path);

    internal static long[][] ReadTruth(string path)
    {
        using var reader = new BinaryReader(File.OpenRead(path));
        int q = reader.ReadInt32();
        var truth = new long[q][];
        for (int i = 0; i < q; i++)
        {
            truth[i] = new long[K];
            for (int j = 0; j < K; j++)
            {
                truth[i][j] = reader.ReadInt64();
            }
        }

        return truth;
    }

    private sealed class ConsoleProgress(string kind, Stopwatch watch, LadderMemory memory) : IProgress<StreamingBuildProgress>
    {
        private long _nextReport;

        public void Report(StreamingBuildProgress value)
        {
            memory.Stage(value.Stage.ToString());
            if (value.Stage == StreamingBuildStage.Training)
            {
                Console.Error.WriteLine($"{kind}: training {(value.Completed == 0 ? "starts" : "done")} at {watch.Elapsed.TotalSeconds:F0} s");
                return;
            }

            if (value.Stage == StreamingBuildStage.Adding && value.Completed >= _nextReport)
            {
                Console.Error.WriteLine($"{kind}: {value.Completed:N0} of {value.Total:N0} rows added at {watch.Elapsed.TotalSeconds:F0} s");
                _nextReport = value.Completed + Math.Max(1, value.Total / 20);
            }
        }
    }
}
