using System.Diagnostics;
using System.Globalization;
using VectorKit.Benchmarks.Persistence;
using VectorKit.Indexes;
using VectorKit.IO;
using VectorKit.Persistence;

namespace VectorKit.Benchmarks.Ladder;

/// <summary>
/// The ladder's mapped-open figures for a rung's saved index: <see cref="IndexFile.OpenMapped(string, MappedOpenOptions?, CancellationToken)"/>
/// against <see cref="IndexFile.Load(string, IndexLoadOptions?, CancellationToken)"/> of the same file, each with its
/// pages dropped from the page cache first (cold) and then cached (warm): time to open, time to the first query, the
/// first pass's queries/s over every query and a second pass's, recall@10 and the anonymous memory added. Full vectors
/// are re-scored from the mapped data file, which stays in the page cache throughout (only the index file is dropped).
/// </summary>
internal static class LadderMappedOpen
{
    private const int K = 10;

    public static void Run(string folder, string dataPath, string queryPath, string truthPath, string kind, string setting)
    {
        string[] knobs = setting.Split('/');
        var options = new SearchOptions
        {
            SearchWidth = int.Parse(knobs[0], CultureInfo.InvariantCulture),
            RescoreDepth = int.Parse(knobs[1], CultureInfo.InvariantCulture),
            MaxDegreeOfParallelism = 1,
        };

        // The ladder saves its index in the format of the build's day; saved again, it takes the current format, whose
        // inverted-file lists can be mapped in place.
        string saved = Path.Combine(folder, $"{kind}.index");
        string current = Path.Combine(folder, $"{kind}.current.vkx");
        if (!File.Exists(current))
        {
            var resave = Stopwatch.StartNew();
            using (IVectorIndex old = IndexFile.Load(saved))
            {
                IndexFile.Save(old, current);
            }

            Console.Error.WriteLine($"{kind}: saved again in the current format in {resave.Elapsed.TotalSeconds:F0} s");
        }

        VectorSet queries = LadderSteps.NpyOrFvecs(queryPath);
        long[][] truth = LadderSteps.ReadTruth(truthPath);
        using FileVectorSource source = StreamingBuild.OpenFullVectors(dataPath, reads: FileVectorReads.Mapped);
        MappedOpen.WarmCache(dataPath);
        Console.WriteLine($"mapped open vs load, {kind}, {new FileInfo(current).Length / 1e6:F0} MB index file, {queries.Count:N0} queries, setting {setting} (lists probed / re-scoring depth), one thread");
        Console.WriteLine("| opening | index file | open (ms) | first query (ms) | first pass q/s | second pass q/s | recall@10 | anonymous memory added (MiB) |");
        Console.WriteLine("|---|---|---:|---:|---:|---:|---:|---:|");
        Figures? mappedCold = null, mappedWarm = null;
        foreach (bool cold in new[] { true, false })
        {
            foreach (bool mapped in new[] { true, false })
            {
                if (cold)
                {
                    MappedOpen.DropFromCache(current);
                }
                else
                {
                    MappedOpen.WarmCache(current);
                }

                Figures f = Measure(current, mapped, source, queries, truth, options);
                Console.WriteLine(string.Create(CultureInfo.InvariantCulture,
                    $"| {(mapped ? "mapped" : "loaded")} | {(cold ? "cold" : "warm")} | {f.OpenMs:F1} | {f.FirstQueryMs:F1} | {f.FirstPass:F0} | {f.SecondPass:F0} | {f.Recall:F4} | {f.AnonMiB:F0} |"));
                if (mapped)
                {
                    (cold ? ref mappedCold : ref mappedWarm) = f;
                }
            }
        }

        // For the ladder's table: the cold mapped open's time to its first answer, its first pass and the warm second pass.
        File.WriteAllText(Path.Combine(folder, $"{kind}.mapped"), string.Create(CultureInfo.InvariantCulture,
            $"{mappedCold!.Value.OpenMs + mappedCold.Value.FirstQueryMs:F1}\t{mappedCold.Value.FirstPass:F1}\t{mappedWarm!.Value.SecondPass:F1}\n"));
    }

    /// <summary>The ladder table's three mapped-open columns for one row (empty where no mapped-open step ran).</summary>
    public static string Columns(string root, long count, int dimension, string kind)
    {
        string file = Path.Combine(root, $"n{count}-d{dimension}", $"{kind}.mapped");
        return File.Exists(file) ? File.ReadAllText(file).Trim() : "\t\t";
    }

    private static Figures Measure(string file, bool mapped, FileVectorSource source, VectorSet queries, long[][] truth, SearchOptions options)
    {
        GC.Collect();
        GC.WaitForPendingFinalizers();
        (long anon0, _) = MappedOpen.Resident();
        var clock = Stopwatch.StartNew();
        using IVectorIndex index = mapped ? IndexFile.OpenMapped(file) : IndexFile.Load(file);
        ((IExternalFullVectors)index).AttachFullVectors(source);
        double open = clock.Elapsed.TotalMilliseconds;
        int d = queries.Dimension;
        var hits = new SearchHit[K];
        index.Search(queries.Data.AsSpan(0, d), hits, options);
        double first = clock.Elapsed.TotalMilliseconds - open;
        double firstPass = Pass(index, queries, hits, options, truth, out _);
        double secondPass = Pass(index, queries, hits, options, truth, out double recall);
        (long anon1, _) = MappedOpen.Resident();
        return new Figures(open, first, firstPass, secondPass, recall, (anon1 - anon0) / 1024.0);
    }

    private static double Pass(IVectorIndex index, VectorSet queries, SearchHit[] hits, SearchOptions options, long[][] truth, out double recall)
    {
        int d = queries.Dimension;
        long found = 0;
        var watch = Stopwatch.StartNew();
        for (int i = 0; i < truth.Length; i++)
        {
            int n = index.Search(queries.Data.AsSpan(i * d, d), hits, options);
            for (int j = 0; j < n; j++)
            {
                found += Array.IndexOf(truth[i], hits[j].Id) >= 0 ? 1 : 0;
            }
        }

        double qps = truth.Length / watch.Elapsed.TotalSeconds;
        recall = found / (double)(truth.Length * K);
        return qps;
    }

    private readonly record struct Figures(double OpenMs, double FirstQueryMs, double FirstPass, double SecondPass, double Recall, double AnonMiB);
}
