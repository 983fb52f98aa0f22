using System.Diagnostics;
using System.Globalization;
using VectorKit.IO;

namespace VectorKit.Benchmarks.Ladder;

/// <summary>
/// The ladder: clustered data of 10³ … 10⁷ rows (and an opt-in 10⁸ × 64 rung) written to disk, every index built from the
/// file by <see cref="IO.StreamingBuild"/> with full vectors left in the file, and per rung the build time, bytes per
/// vector, peak resident memory and the cheapest single-thread queries/s at recall@10 ≥ 0.90 and ≥ 0.95 beside the exact
/// scan. Each step runs as a child process (so each peak is its own); the table is printed per rung, and
/// <c>ladder.tsv</c>, <c>ladder-points.tsv</c> and <c>ladder.png</c> are rewritten from every rung measured so far.
/// </summary>
/// <remarks>
/// Arguments (any order): <c>rungs=3,4,5,6,7</c> (exponents; <c>8x64</c> is 10⁸ × 64), <c>dim=128</c>,
/// <c>kinds=ivf-fastscan,ivf-pq,graph-8bit</c>, <c>queries=1000</c>, <c>format=npy|fvecs</c>, <c>reads=mapped|positional</c>
/// (how re-scoring reads the data file), <c>dir=BenchmarkDotNet.Artifacts/ladder</c>.
/// A rung's data and ground truth are kept in its folder and reused by later runs; <c>rungs=</c> (empty) only rewrites the
/// summary files from the results already there (after steps run by hand with <c>ladder-step</c>).
/// </remarks>
internal static class LadderHarness
{
    public static void Run(string[] args)
    {
        Dictionary<string, string> options = args.Skip(1).Select(a => a.Split('=', 2)).ToDictionary(p => p[0], p => p.Length > 1 ? p[1] : "");
        string root = Path.GetFullPath(options.GetValueOrDefault("dir", Path.Combine("BenchmarkDotNet.Artifacts", "ladder")));
        int defaultDimension = int.Parse(options.GetValueOrDefault("dim", "128"), CultureInfo.InvariantCulture);
        int queries = int.Parse(options.GetValueOrDefault("queries", "1000"), CultureInfo.InvariantCulture);
        string format = options.GetValueOrDefault("format", "npy");
        string reads = options.GetValueOrDefault("reads", "mapped");
        string[] kinds = options.GetValueOrDefault("kinds", "ivf-fastscan,ivf-pq,graph-8bit").Split(',');
        Directory.CreateDirectory(root);
        Console.WriteLine($"ladder: {Environment.ProcessorCount} cores, {root}; single-thread queries, builds on 2 threads; each step in its own process");
        // rungs= (empty) measures nothing and only rewrites the table, TSVs and plot from the results already there.
        foreach (string rung in options.GetValueOrDefault("rungs", "3,4,5,6,7").Split(',', StringSplitOptions.RemoveEmptyEntries))
        {
            string[] parts = rung.Split('x');
            long count = checked((long)Math.Pow(10, int.Parse(parts[0], CultureInfo.InvariantCulture)));
            int d = parts.Length > 1 ? int.Parse(parts[1], CultureInfo.InvariantCulture) : defaultDimension;
            RunRung(root, count, d, queries, format, kinds, reads);
            Summarise(root);
        }

        Summarise(root);
    }

    /// <summary>
    /// A child process's entry: <c>ladder-step data|truth|ivf-fastscan|ivf-pq|graph-8bit folder count dimension queries format
    /// [positional|mapped] [grid=width/depth,...] [open=mapped]</c>. <c>grid=</c> measures only the given settings instead of
    /// the kind's sweep (for a rung where every setting takes minutes); <c>open=mapped</c> opens a saved index by mapping
    /// instead of loading it.
    /// </summary>
    public static void Step(string[] args)
    {
        string step = args[1];
        string folder = args[2];
        long count = long.Parse(args[3], CultureInfo.InvariantCulture);
        int d = int.Parse(args[4], CultureInfo.InvariantCulture);
        int queries = int.Parse(args[5], CultureInfo.InvariantCulture);
        string format = args[6];
        string data = Path.Combine(folder, $"data.{format}");
        string query = Path.Combine(folder, $"queries.{format}");
        string truth = Path.Combine(folder, "truth.bin");
        switch (step)
        {
            case "data":
                LadderData.Write(data, query, count, d, queries);
                break;
            case "truth":
                LadderSteps.Truth(data, query, truth, Path.Combine(folder, "exact.result"));
                break;
            case "mapped-open":
                // ladder-step mapped-open folder count dimension queries format kind probes/depth
                LadderMappedOpen.Run(folder, data, query, truth, args[7], args[8]);
                break;
            default:
                FileVectorReads reads = args.Length > 7 && args[7] == "mapped" ? FileVectorReads.Mapped : FileVectorReads.Positional;
                string? grid = args.Skip(8).FirstOrDefault(a => a.StartsWith("grid=", StringComparison.Ordinal))?["grid=".Length..];
                bool openMapped = args.Skip(8).Contains("open=mapped");
                LadderSteps.BuildAndSweep(step, data, query, truth, Path.Combine(folder, $"{step}.result"), reads, grid, openMapped);
                break;
        }
    }

    private static void RunRung(string root, long count, int d, int queries, string format, string[] kinds, string reads)
    {
        string folder = Path.Combine(root, $"n{count}-d{d}");
        Directory.CreateDirectory(folder);
        long needed = count * ((4L * d) + 4);
        long free = new DriveInfo(folder).AvailableFreeSpace;
        if (!File.Exists(Path.Combine(folder, $"data.{format}")) && needed > free * 0.9)
        {
            Console.WriteLine($"rung {count:N0} × {d}: needs {needed / 1e9:F1} GB of disk, {free / 1e9:F1} GB free; skipped");
            return;
        }

        Console.WriteLine();
        Console.WriteLine($"rung {count:N0} × {d}: {LadderData.Clusters(count):N0} clusters, spread {LadderData.Spread}, {queries:N0} queries from the same centres, {format} on disk");
        var watch = Stopwatch.StartNew();
        Child("data", folder, count, d, queries, format, reads);
        if (!File.Exists(Path.Combine(folder, "truth.bin")) || !File.Exists(Path.Combine(folder, "exact.result")))
        {
            Child("truth", folder, count, d, queries, format, reads);
        }

        foreach (string kind in kinds)
        {
            Child(kind, folder, count, d, queries, format, reads);
        }

        Console.WriteLine($"rung {count:N0} × {d} took {watch.Elapsed.TotalMinutes:F1} min");
        PrintTable(folder, count, d);
    }

    private static void Child(string step, string folder, long count, int d, int queries, string format, string reads)
    {
        string self = Environment.ProcessPath!;
        var start = new ProcessStartInfo(self) { UseShellExecute = false };
        if (Path.GetFileNameWithoutExtension(self) == "dotnet")
        {
            start.ArgumentList.Add(typeof(LadderHarness).Assembly.Location);
        }

        foreach (string a in new[] { "ladder-step", step, folder, count.ToString(CultureInfo.InvariantCulture), d.ToString(CultureInfo.InvariantCulture), queries.ToString(CultureInfo.InvariantCulture), format, reads })
        {
            start.ArgumentList.Add(a);
        }

        using Process child = Process.Start(start)!;
        child.WaitForExit();
        if (child.ExitCode != 0)
        {
            throw new InvalidOperationException($"ladder step '{step}' for {count} × {d} exited with code {child.ExitCode}");
        }
    }

    private static IEnumerable<(long Count, int Dimension, LadderResult Result)> Results(string root)
    {
        foreach (string folder in Directory.GetDirectories(root, "n*-d*").Order())
        {
            string[] name = Path.GetFileName(folder)[1..].Split("-d");
            long count = long.Parse(name[0], CultureInfo.InvariantCulture);
            int d = int.Parse(name[1], CultureInfo.InvariantCulture);
            foreach (string kind in new[] { "exact", "ivf-pq", "ivf-fastscan", "graph-8bit" })
            {
                string path = Path.Combine(folder, $"{kind}.result");
                if (File.Exists(path))
                {
                    yield return (count, d, LadderResult.Load(path));
                }
            }
        }
    }

    private static void PrintTable(string folder, long count, int d)
    {
        Console.WriteLine("| kind | build (s) | bytes/vector | peak resident (MiB) | q/s @ recall ≥ 0.90 (per CPU-s) | setting (recall) | q/s @ recall ≥ 0.95 (per CPU-s) | setting (recall) |");
        Console.WriteLine("|---|---:|---:|---:|---:|---|---:|---|");
        foreach ((long c, int dd, LadderResult r) in Results(Path.GetDirectoryName(folder)!).Where(x => x.Count == count && x.Dimension == d))
        {
            Console.WriteLine(Row(r));
        }
    }

    private static string Row(LadderResult r)
    {
        LadderPoint? a = r.Cheapest(0.90);
        LadderPoint? b = r.Cheapest(0.95);
        return string.Create(CultureInfo.InvariantCulture,
            $"| {r.Kind} | {r.BuildSeconds:F1} | {r.BytesPerVector:F0} | {r.PeakResidentMiB:F0} | {Qps(a)} | {Setting(a)} | {Qps(b)} | {Setting(b)} |");
    }

    private static string Qps(LadderPoint? p) => p is null ? "not reached" : string.Create(CultureInfo.InvariantCulture, $"{p.QueriesPerSecond:F0} ({p.CpuQueriesPerSecond:F0})");

    private static string Setting(LadderPoint? p) => p is null ? "–" : string.Create(CultureInfo.InvariantCulture, $"{p.Setting} ({p.Recall:F4})");

    /// <summary>Rewrites ladder.tsv, ladder-points.tsv and ladder.png from every rung's results in <paramref name="root"/>.</summary>
    private static void Summarise(string root)
    {
        var all = Results(root).ToList();
        using (var tsv = new StreamWriter(Path.Combine(root, "ladder.tsv")))
        {
            // The mapped-open columns come from a `mapped-open` step's file beside the result, where one was run.
            tsv.WriteLine("count\tdimension\tkind\tbuild_seconds\tbytes_per_vector\tpeak_resident_mib\tqps_at_0.90\tcpu_qps_at_0.90\tsetting_at_0.90\trecall_at_0.90\tqps_at_0.95\tcpu_qps_at_0.95\tsetting_at_0.95\trecall_at_0.95\tmapped_first_query_ms\tmapped_cold_qps\tmapped_warm_qps\tnotes");
            foreach ((long count, int d, LadderResult r) in all)
            {
                LadderPoint? a = r.Cheapest(0.90);
                LadderPoint? b = r.Cheapest(0.95);
                tsv.WriteLine(string.Create(CultureInfo.InvariantCulture,
                    $"{count}\t{d}\t{r.Kind}\t{r.BuildSeconds:F2}\t{r.BytesPerVector:F1}\t{r.PeakResidentMiB:F0}\t{a?.QueriesPerSecond:F1}\t{a?.CpuQueriesPerSecond:F1}\t{a?.Setting}\t{a?.Recall:F4}\t{b?.QueriesPerSecond:F1}\t{b?.CpuQueriesPerSecond:F1}\t{b?.Setting}\t{b?.Recall:F4}\t{LadderMappedOpen.Columns(root, count, d, r.Kind)}\t{r.Notes}"));
            }
        }

        using (var points = new StreamWriter(Path.Combine(root, "ladder-points.tsv")))
        {
            points.WriteLine("count\tdimension\tkind\tsetting\trecall_at_10\tqueries_per_second\tqueries_per_cpu_second");
            foreach ((long count, int d, LadderResult r) in all)
            {
                foreach (LadderPoint p in r.Points)
                {
                    points.WriteLine(string.Create(CultureInfo.InvariantCulture, $"{count}\t{d}\t{r.Kind}\t{p.Setting}\t{p.Recall:F4}\t{p.QueriesPerSecond:F1}\t{p.CpuQueriesPerSecond:F1}"));
                }
            }
        }

        LadderPlot.Draw(all.Select(x => (x.Count, x.Dimension, x.Result)).ToList(), all.Count > 0 ? all[0].Dimension : 0, Path.Combine(root, "ladder.png"));
    }
}
