using System.Diagnostics;
using System.Globalization;
using System.Runtime.InteropServices;
using VectorKit.Distance;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;
using VectorKit.IO;
using VectorKit.Tests.TestData;
using VectorKit.Tuning;

namespace VectorKit.Benchmarks.Indexes;

/// <summary>
/// Recall-targeted tuning on a real or synthetic data set, every index kind and storage variant side by side with its
/// untuned defaults: <c>tuning [fashion-mnist|text|clustered] [target] [cosine] [count] [dimension] [kinds]</c>, kinds a
/// comma-separated subset of exact, exact-8bit, graph, graph-8bit, ivf, ivf-8bit, ivf-product (default all). The queries
/// are split in two by position (even rows, odd rows): the tuning sees only the even ones (and splits them again for its
/// own report); every figure printed is measured on the odd ones, which it never saw. Per variant: bytes per vector,
/// recall@10 with its 95 % interval and single-thread queries/s at the untuned and at the tuned defaults, the tuning's
/// own time, and a full sweep on the unseen queries (widths in steps of about 5 %, depths 0, k, 2k, ... 64k): its first
/// setting meeting the target (point estimate) at each depth, less those another needs less of both knobs than, are
/// timed in alternation with the chosen one (medians of 7 rounds); the chosen time over the least is the "within 20 %"
/// check. The library counts no distance evaluations (a counter would sit in the search loops), so the widths' ratio
/// stands in for the work where the depths match.
/// </summary>
public static class TuningBenchmark
{
    private const int K = 10;
    private const int TimedPasses = 3;
    private const int Rounds = 7;

    private sealed record Variant(string Key, string Name, Func<VectorIndex> Create);

    public static void Run(string dataSet, double target, bool cosine, int count, int dimension, string[]? only = null)
    {
        var total = Stopwatch.StartNew();
        (float[] data, float[] queries, int d, DistanceMetric metric, string source) = Load(dataSet, cosine, count, dimension);
        int n = data.Length / d;
        long[] ids = Enumerable.Range(0, n).Select(i => (long)i).ToArray();
        (float[] tuneQueries, float[] unseen) = Split(queries, d);
        Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"{source}: {n:N0} × {d}, {metric}; {tuneQueries.Length / d} tuning queries, {unseen.Length / d} unseen; target recall@{K} {target}"));

        var exactTruth = new ExactIndex(d, metric);
        exactTruth.AddRange(ids, data);
        long[][] truth = RecallTuning.ExactNeighbors(exactTruth, unseen, K, CancellationToken.None);
        exactTruth.Dispose();

        int lists = Math.Max(16, (int)Math.Round(Math.Sqrt(n) / 16) * 16);   // about √n, common practice
        int productBytes = d % 56 == 0 ? 56 : d % 48 == 0 ? 48 : d % 32 == 0 ? 32 : d;
        Variant[] variants =
        [
            new("exact", "exact, float32", () => new ExactIndex(d, metric)),
            new("exact-8bit", "exact, 8-bit + re-scoring", () => new ExactIndex(d, metric, new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = K })),
            new("graph", "graph, float32", () => new GraphIndex(d, metric)),
            new("graph-8bit", "graph, 8-bit + re-scoring", () => new GraphIndex(d, metric, new GraphIndexOptions { Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = K })),
            new("ivf", $"inverted file, float32, {lists} lists", () => new InvertedFileIndex(d, metric, new InvertedFileOptions { ListCount = lists })),
            new("ivf-8bit", $"inverted file, 8-bit + re-scoring, {lists} lists", () => new InvertedFileIndex(d, metric, new InvertedFileOptions { ListCount = lists, Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = K })),
            new("ivf-product", $"inverted file, product codes {productBytes} B + re-scoring, {lists} lists", () => new InvertedFileIndex(d, metric, new InvertedFileOptions { ListCount = lists, Encoding = VectorEncoding.ProductCodes, ProductCodeBytes = productBytes, RescoreDepth = 100 })),
        ];

        var rows = new List<string>();
        foreach (Variant variant in variants.Where(v => only is null || only.Contains(v.Key)))
        {
            var build = Stopwatch.StartNew();
            using VectorIndex index = variant.Create();
            if (!index.IsTrained)
            {
                index.Train(data);
            }

            index.AddRange(ids, data);
            double buildSeconds = build.Elapsed.TotalSeconds;
            double bytes = index.MemoryBytes / (double)index.Count;
            SearchKnobs knobs = index.Knobs;

            (double uRecall, double uLow, double uHigh) = Recall(index, unseen, truth, null);
            double uMicros = Micros(index, unseen, null);

            var tuning = Stopwatch.StartNew();
            TuningReport report = RecallTuning.Tune(index, tuneQueries, new RecallTuningOptions { TargetRecall = target, K = K });
            double tuneSeconds = tuning.Elapsed.TotalSeconds;
            Console.WriteLine($"== {variant.Name}: built in {buildSeconds:F1} s, tuned in {tuneSeconds:F1} s");
            Console.WriteLine(report);

            (double tRecall, double tLow, double tHigh) = Recall(index, unseen, truth, null);
            double tMicros = Micros(index, unseen, null);
            TuningPoint chosen = report.Chosen;

            // The full sweep on the unseen queries: per depth, the first width (in steps of about 5 %) whose recall meets the target.
            var meeting = new List<(int? W, int? D)>();
            int sweptPoints = 0;
            foreach (int? depth in knobs.Rescores ? new int?[] { 0, K, 2 * K, 4 * K, 8 * K, 16 * K, 32 * K, 64 * K } : [null])
            {
                if (knobs.MaxWidth == 0)
                {
                    (double r, _, _) = Recall(index, unseen, truth, Options(null, depth));
                    sweptPoints++;
                    if (r >= target)
                    {
                        meeting.Add((null, depth));
                    }

                    continue;
                }

                int low = knobs.WidthCoversDepth ? Math.Max(K, depth ?? 0) : 1;
                int high = knobs.WidthCoversDepth ? Math.Min(knobs.MaxWidth, n) : knobs.MaxWidth;
                double previous = double.NegativeInfinity;
                int previousWidth = 0;
                for (int width = low; width <= high; width = Math.Max(width + 1, (int)Math.Ceiling(width * 1.05)))
                {
                    (double r, _, _) = Recall(index, unseen, truth, Options(width, depth));
                    sweptPoints++;
                    if (r >= target)
                    {
                        meeting.Add((width, depth));
                        break;
                    }

                    // Flat since the width was half as large: this depth cannot reach the target.
                    if (width >= 2 * Math.Max(1, previousWidth) && r - previous < 0.0005)
                    {
                        break;
                    }

                    if (width >= 2 * Math.Max(1, previousWidth))
                    {
                        previous = r;
                        previousWidth = width;
                    }
                }
            }

            // The sweep's candidates that no other needs less of both knobs than (depths of at most k count as 0: they
            // return the same items), and the chosen setting, timed in alternation: Rounds rounds, each one single-thread
            // pass of every setting in an order rotated by one, after an untimed pass of each; medians compared. The
            // cheapest is the candidate with the least median; a chosen setting doing the same work as it counts as equal.
            string sweep = "no setting meets the target";
            var candidates = meeting.Where((c, i) => !meeting.Where((o, j) => j != i && Work(o.W) <= Work(c.W) && Depth(o.D) <= Depth(c.D)
                && (Work(o.W) < Work(c.W) || Depth(o.D) < Depth(c.D) || j < i)).Any()).ToList();
            if (candidates.Count > 0)
            {
                (int? W, int? D) chosenSetting = (chosen.SearchWidth, chosen.RescoreDepth);
                bool Same((int? W, int? D) a, (int? W, int? D) b) => a.W == b.W && Depth(a.D) == Depth(b.D);
                var timed = new List<(int? W, int? D)> { chosenSetting };
                timed.AddRange(candidates.Where(c => !Same(c, chosenSetting)));
                bool chosenIsCandidate = candidates.Any(c => Same(c, chosenSetting));
                double[] medians = timed.Count > 1 ? Medians(index, unseen, timed) : [double.NaN];
                int cheapestAt = timed.Count == 1 ? 0 : Enumerable.Range(chosenIsCandidate ? 0 : 1, timed.Count - (chosenIsCandidate ? 0 : 1)).MinBy(i => medians[i]);
                bool same = cheapestAt == 0;
                (int? cw, int? cd) = timed[cheapestAt];
                string ratio = timed.Count == 1 ? "1 (same work)" : same ? "1 (the chosen is the fastest)" : (medians[0] / medians[cheapestAt]).ToString("F2", CultureInfo.InvariantCulture);
                string widths = same || cw is null || chosen.SearchWidth is null || Depth(cd) != Depth(chosen.RescoreDepth) ? string.Empty : string.Create(CultureInfo.InvariantCulture, $", widths {chosen.SearchWidth}/{cw} = {(double)chosen.SearchWidth / cw.Value:F2}");
                sweep = string.Create(CultureInfo.InvariantCulture, $"{Cell(cw)}/{Cell(cd)}; chosen/cheapest time {ratio}{widths}");
            }

            Console.WriteLine($"sweep over {sweptPoints} settings: cheapest meeting {target} on unseen queries {sweep}");
            rows.Add(string.Create(CultureInfo.InvariantCulture,
                $"| {variant.Name} | {bytes:F0} | {Cell(knobs.MaxWidth > 0 ? knobs.DefaultWidth : null)}/{Cell(knobs.Rescores ? knobs.DefaultDepth : null)} | {uRecall:F4} [{uLow:F3}, {uHigh:F3}] | {1e6 / uMicros:F0} | {Cell(chosen.SearchWidth)}/{Cell(chosen.RescoreDepth)} | {tRecall:F4} [{tLow:F3}, {tHigh:F3}] | {1e6 / tMicros:F0} | {tuneSeconds:F0} s | {sweep} |"));
        }

        Console.WriteLine();
        Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"target recall@{K} {target}; all figures on the {unseen.Length / d} unseen queries; width/depth, '-' where the kind has none"));
        Console.WriteLine("| index | bytes/vector | untuned width/depth | untuned recall [95 % interval] | untuned q/s | tuned width/depth | tuned recall [95 % interval] | tuned q/s | tuning time | full sweep's cheapest meeting the target; chosen/cheapest time |");
        Console.WriteLine("|---|---:|---:|---:|---:|---:|---:|---:|---:|---|");
        rows.ForEach(Console.WriteLine);
        Console.WriteLine(string.Create(CultureInfo.InvariantCulture,
            $"machine: {Environment.ProcessorCount} cores, {RuntimeInformation.FrameworkDescription}; {DateTime.UtcNow:yyyy-MM-dd HH:mm} UTC; ran {total.Elapsed.TotalSeconds:F0} s; peak working set {Process.GetCurrentProcess().PeakWorkingSet64 / 1048576.0:F0} MiB"));
    }

    private static string Cell(int? value) => value?.ToString(CultureInfo.InvariantCulture) ?? "-";

    private static SearchOptions Options(int? width, int? depth)
        => depth is null ? new SearchOptions { SearchWidth = width } : new SearchOptions { SearchWidth = width, RescoreDepth = depth };

    // Recall@k of a batch (all cores) against the exact neighbours, with the 95 % interval the tuning uses.
    private static (double Mean, double Low, double High) Recall(VectorIndex index, float[] queries, long[][] truth, SearchOptions? options)
    {
        BatchSearchResults results = index.SearchBatch(queries, K, options);
        int[] found = new int[truth.Length];
        for (int q = 0; q < truth.Length; q++)
        {
            foreach (SearchHit hit in results[q])
            {
                if (Array.IndexOf(truth[q], hit.Id) >= 0)
                {
                    found[q]++;
                }
            }
        }

        return RecallStatistics.Estimate(found, K, RecallStatistics.TwoSidedZ(0.95));
    }

    // A depth of at most k re-scores only the items returned: the same set, the same work as none, give or take k distances.
    private static int Depth(int? depth) => depth is { } d && d > K ? d : 0;

    private static int Work(int? width) => width ?? 0;

    // Medians of single-thread time per query, the settings timed in alternation (see the caller).
    private static double[] Medians(VectorIndex index, float[] queries, List<(int? W, int? D)> settings)
    {
        foreach ((int? w, int? dp) in settings)
        {
            Pass(index, queries, Options(w, dp));
        }

        var times = settings.Select(_ => new List<double>()).ToArray();
        for (int round = 0; round < Rounds; round++)
        {
            for (int j = 0; j < settings.Count; j++)
            {
                int i = (j + round) % settings.Count;
                times[i].Add(Pass(index, queries, Options(settings[i].W, settings[i].D)));
            }
        }

        return times.Select(t => t.Order().ElementAt(t.Count / 2)).ToArray();
    }

    // One single-thread pass over the queries: microseconds per query.
    private static double Pass(VectorIndex index, float[] queries, SearchOptions? options)
    {
        int d = index.Dimension;
        int n = queries.Length / d;
        var hits = new SearchHit[K];
        long start = Stopwatch.GetTimestamp();
        for (int q = 0; q < n; q++)
        {
            index.Search(queries.AsSpan(q * d, d), hits, options);
        }

        return Stopwatch.GetElapsedTime(start).TotalMicroseconds / n;
    }

    // Single-thread time per query: the fastest of a few passes over the queries after an untimed one.
    private static double Micros(VectorIndex index, float[] queries, SearchOptions? options)
    {
        int d = index.Dimension;
        int n = queries.Length / d;
        var hits = new SearchHit[K];
        for (int q = 0; q < n; q++)
        {
            index.Search(queries.AsSpan(q * d, d), hits, options);
        }

        double best = double.PositiveInfinity;
        for (int pass = 0; pass < TimedPasses; pass++)
        {
            long start = Stopwatch.GetTimestamp();
            for (int q = 0; q < n; q++)
            {
                index.Search(queries.AsSpan(q * d, d), hits, options);
            }

            best = Math.Min(best, Stopwatch.GetElapsedTime(start).TotalMicroseconds / n);
        }

        return best;
    }

    private static (float[] Tune, float[] Unseen) Split(float[] queries, int d)
    {
        int n = queries.Length / d;
        var tune = new List<float>();
        var unseen = new List<float>();
        for (int q = 0; q < n; q++)
        {
            (q % 2 == 0 ? tune : unseen).AddRange(queries.AsSpan(q * d, d));
        }

        return (tune.ToArray(), unseen.ToArray());
    }

    private static (float[] Data, float[] Queries, int D, DistanceMetric Metric, string Source) Load(string dataSet, bool cosine, int count, int dimension)
    {
        switch (dataSet)
        {
            case "fashion-mnist":
            {
                int d = TestData.ImageDimension;
                float[] data = TestData.Images(TestData.FashionTrainImages, 60_000, seed: 1, out string source);
                float[] queries = TestData.Images(TestData.FashionTestImages, 2_000, seed: 2, out _);
                return (data, queries, d, cosine ? DistanceMetric.Cosine : DistanceMetric.SquaredEuclidean, "Fashion-MNIST, " + source + ", first 2,000 test images as queries");
            }

            case "text":
            {
                string root = Path.Combine(Environment.GetEnvironmentVariable("VECTORKIT_DATA") is { Length: > 0 } v ? v : Path.Combine(Environment.GetFolderPath(Environment.SpecialFolder.UserProfile), ".cache", "vectorkit"), "text-embeddings", "full");
                VectorSet items = VecsFile.ReadFvecs(Path.Combine(root, "items.fvecs"));
                VectorSet queries = VecsFile.ReadFvecs(Path.Combine(root, "queries-text.fvecs"));
                return (items.Data, queries.Data, items.Dimension, DistanceMetric.Cosine, "MiniLM text embeddings (items.fvecs, queries-text.fvecs)");
            }

            default:
            {
                int clusters = Math.Max(1, count / 100);
                float[] all = ClusteredData.Generate(count + 2_000, dimension, clusters, 0.2f, seed: 101);
                return (all.AsSpan(0, count * dimension).ToArray(), all.AsSpan(count * dimension).ToArray(), dimension, DistanceMetric.SquaredEuclidean, $"clustered synthetic ({clusters} clusters, spread 0.2; queries the generator's next 2,000 rows)");
            }
        }
    }
}
