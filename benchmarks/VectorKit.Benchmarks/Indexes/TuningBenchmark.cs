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
/// untuned defaults: <c>tuning [fashion-mnist|text|clustered] [target] [cosine] [count] [dimension]</c>. The queries
/// are split in two by position (even rows, odd rows): the tuning sees only the even ones (and splits them again for its
/// own report); every figure printed is measured on the odd ones, which it never saw. Per variant: bytes per vector,
/// recall@10 with its 95 % interval and single-thread queries/s at the untuned and at the tuned defaults, the tuning's
/// own time, and a full sweep on the unseen queries (widths in steps of about 5 %, depths 0, k, 2k, ... 16k) whose
/// cheapest setting meeting the target (point estimate) is timed the same way as the chosen one: the ratio of their
/// times per query is the "within 20 %" check.
/// </summary>
public static class TuningBenchmark
{
    private const int K = 10;
    private const int TimedPasses = 3;

    private sealed record Variant(string Name, Func<VectorIndex> Create);

    public static void Run(string dataSet, double target, bool cosine, int count, int dimension)
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
            new("exact, float32", () => new ExactIndex(d, metric)),
            new("exact, 8-bit + re-scoring", () => new ExactIndex(d, metric, new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = K })),
            new("graph, float32", () => new GraphIndex(d, metric)),
            new("graph, 8-bit + re-scoring", () => new GraphIndex(d, metric, new GraphIndexOptions { Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = K })),
            new($"inverted file, float32, {lists} lists", () => new InvertedFileIndex(d, metric, new InvertedFileOptions { ListCount = lists })),
            new($"inverted file, 8-bit + re-scoring, {lists} lists", () => new InvertedFileIndex(d, metric, new InvertedFileOptions { ListCount = lists, Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = K })),
            new($"inverted file, product codes {productBytes} B + re-scoring, {lists} lists", () => new InvertedFileIndex(d, metric, new InvertedFileOptions { ListCount = lists, Encoding = VectorEncoding.ProductCodes, ProductCodeBytes = productBytes, RescoreDepth = 100 })),
        ];

        var rows = new List<string>();
        foreach (Variant variant in variants)
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
            (int? w, int? dp, double micros)? cheapest = null;
            int sweptPoints = 0;
            foreach (int? depth in knobs.Rescores ? new int?[] { 0, K, 2 * K, 4 * K, 8 * K, 16 * K } : [null])
            {
                if (knobs.MaxWidth == 0)
                {
                    (double r, _, _) = Recall(index, unseen, truth, Options(null, depth));
                    sweptPoints++;
                    if (r >= target)
                    {
                        Consider(null, depth);
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
                        Consider(width, depth);
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

            void Consider(int? width, int? depth)
            {
                double micros = Micros(index, unseen, Options(width, depth));
                if (cheapest is null || micros < cheapest.Value.micros)
                {
                    cheapest = (width, depth, micros);
                }
            }

            // The chosen and the cheapest setting timed in alternation, so that both see the same minutes of a shared
            // machine; a setting that does the same work as the other (the same width, and the same depth or both at most k,
            // which re-scores no more than k) counts as equal without timing.
            string sweep = "no setting meets the target";
            if (cheapest is { } c)
            {
                bool same = c.w == chosen.SearchWidth && (c.dp == chosen.RescoreDepth || ((c.dp ?? 0) <= K && (chosen.RescoreDepth ?? 0) <= K));
                double ratio = 1;
                if (!same)
                {
                    double chosenBest = double.PositiveInfinity, cheapestBest = double.PositiveInfinity;
                    for (int round = 0; round < 3; round++)
                    {
                        chosenBest = Math.Min(chosenBest, Micros(index, unseen, null));
                        cheapestBest = Math.Min(cheapestBest, Micros(index, unseen, Options(c.w, c.dp)));
                    }

                    ratio = chosenBest / cheapestBest;
                }

                sweep = string.Create(CultureInfo.InvariantCulture, $"{Cell(c.w)}/{Cell(c.dp)}; chosen/cheapest time {(same ? "1 (same work)" : ratio.ToString("F2", CultureInfo.InvariantCulture))}");
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
