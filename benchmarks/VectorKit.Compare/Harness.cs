using System.Diagnostics;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;

namespace VectorKit.Compare;

/// <summary>
/// Measures each index kind in one process: build time (the median of several builds), single-query searches per
/// second over one thread (median of several passes after a warm-up), batch searches per second on all cores (median
/// of several batches), and the recall@k of each against exact ground truth computed once by the exact index's batch
/// search.
/// </summary>
/// <remarks>
/// Everything runs in a fixed order with a full collection before each timed section, so two library versions run
/// through this same source see the same sequence of work. Timed loops hold no allocation of their own besides the
/// library's result objects.
/// </remarks>
internal static class Harness
{
    private const DistanceMetric Metric = DistanceMetric.SquaredEuclidean;

    private static readonly TimeSpan s_minimumWarmUp = TimeSpan.FromSeconds(1);

    public static void Run(CompareSettings settings)
    {
        int queryCount = Math.Max(Math.Max(settings.BatchQueries, settings.CheckQueries), Math.Max(settings.SingleQueries, settings.ExactSingleQueries));
        Log($"{settings.Label}: loading Fashion-MNIST from {settings.DataDirectory} ({settings.Items} items, {queryCount} queries)");
        FashionData data = FashionData.Load(settings.DataDirectory, settings.Items, queryCount);
        var output = new ResultWriter(settings.Label, settings.Round, settings.K);
        bool measureExact = settings.Kinds.Contains("exact");

        // The exact index always runs: its first batch search is the ground truth of every recall figure.
        long[] truth;
        using (IVectorIndex exact = Build(settings, "exact", measureExact ? settings.BuildReps : 1, settings.Items, measureExact ? output : null, () => new ExactIndex(FashionData.Dimension, Metric), data))
        {
            truth = MeasureSearches(settings, "exact", exact, null, settings.ExactSingleQueries, data, truth: null, measureExact ? output : null);

            // The truth is the exact index's own answer; its hash lets two versions' runs show they agree on it.
            output.Write("exact", "truth_hash", Hash(truth));
        }

        if (settings.Kinds.Contains("inverted-file"))
        {
            MeasureKind(settings, "inverted-file", new SearchOptions { SearchWidth = settings.InvertedFileWidth }, data, truth, output, () =>
            {
                var index = new InvertedFileIndex(FashionData.Dimension, Metric, new InvertedFileOptions { ListCount = settings.Lists });
                return index;
            });
        }

        if (settings.Kinds.Contains("graph"))
        {
            MeasureKind(settings, "graph", new SearchOptions { SearchWidth = settings.GraphWidth }, data, truth, output,
                () => new GraphIndex(FashionData.Dimension, Metric));
        }

        Log($"{settings.Label}: done");
    }

    /// <summary>
    /// Times the builds of an approximate kind (with a recall check of each), then its searches on an index of all
    /// items. The graph's timed builds may use a prefix of the items; the searched graph is then built once more on
    /// all of them, and that build is reported as <c>full_build_*</c>.
    /// </summary>
    private static void MeasureKind(
        CompareSettings settings, string kind, SearchOptions options, FashionData data, long[] truth, ResultWriter output, Func<IVectorIndex> create)
    {
        bool graph = kind == "graph";
        int buildItems = graph ? settings.GraphBuildItems : settings.Items;
        int buildReps = graph ? settings.GraphBuildReps : settings.BuildReps;

        long[] buildTruth = truth;
        if (buildItems < settings.Items)
        {
            using var subset = new ExactIndex(FashionData.Dimension, Metric);
            subset.AddRange(Ids(buildItems), data.ItemRows(buildItems));
            buildTruth = Ids(subset.SearchBatch(data.QueryRows(settings.CheckQueries), settings.K), settings.K);
        }

        var seconds = new double[buildReps];
        var recalls = new double[buildReps];
        IVectorIndex? index = null;
        for (int rep = 0; rep < buildReps; rep++)
        {
            index?.Dispose();
            index = BuildOnce(kind, buildItems, create, data, out seconds[rep]);
            recalls[rep] = Recall(Ids(index.SearchBatch(data.QueryRows(settings.CheckQueries), settings.K, options), settings.K), buildTruth, settings.CheckQueries, settings.K);
            Log($"{settings.Label}: {kind} build {rep + 1}/{buildReps}: {seconds[rep]:F2} s, recall@{settings.K} {recalls[rep]:F4}");
        }

        output.Write(kind, "build_items", buildItems);
        output.Write(kind, "build_s", Median(seconds));
        output.Write(kind, "build_items_per_s", buildItems / Median(seconds));
        output.Write(kind, "build_recall", Median(recalls));
        Debug.Assert(index is not null);
        if (buildItems < settings.Items)
        {
            index.Dispose();
            var timer = Stopwatch.StartNew();
            index = BuildOnce(kind, settings.Items, create, data, out _);
            double fullSeconds = timer.Elapsed.TotalSeconds;
            double recall = Recall(Ids(index.SearchBatch(data.QueryRows(settings.CheckQueries), settings.K, options), settings.K), truth, settings.CheckQueries, settings.K);
            Log($"{settings.Label}: {kind} build on all {settings.Items} items: {fullSeconds:F2} s, recall@{settings.K} {recall:F4}");
            output.Write(kind, "full_build_items", settings.Items);
            output.Write(kind, "full_build_s", fullSeconds);
            output.Write(kind, "full_build_items_per_s", settings.Items / fullSeconds);
            output.Write(kind, "full_build_recall", recall);
        }

        using (index)
        {
            MeasureSearches(settings, kind, index, options, settings.SingleQueries, data, truth, output);
        }
    }

    /// <summary>Builds <paramref name="reps"/> times, reports the median time, and returns the last index built.</summary>
    private static IVectorIndex Build(
        CompareSettings settings, string kind, int reps, int items, ResultWriter? output, Func<IVectorIndex> create, FashionData data)
    {
        var seconds = new double[reps];
        IVectorIndex? index = null;
        for (int rep = 0; rep < reps; rep++)
        {
            index?.Dispose();
            index = BuildOnce(kind, items, create, data, out seconds[rep]);
            Log($"{settings.Label}: {kind} build {rep + 1}/{reps}: {seconds[rep]:F2} s");
        }

        output?.Write(kind, "build_items", items);
        output?.Write(kind, "build_s", Median(seconds));
        output?.Write(kind, "build_items_per_s", items / Median(seconds));
        return index!;
    }

    /// <summary>One timed build: construction, training where the kind learns from data, and adding the items.</summary>
    private static IVectorIndex BuildOnce(string kind, int items, Func<IVectorIndex> create, FashionData data, out double seconds)
    {
        long[] ids = Ids(items);
        ReadOnlySpan<float> rows = data.ItemRows(items);
        Collect();
        var timer = Stopwatch.StartNew();
        IVectorIndex index = create();
        if (index is InvertedFileIndex invertedFile)
        {
            invertedFile.Train(rows);
        }

        index.AddRange(ids, rows);
        seconds = timer.Elapsed.TotalSeconds;
        return index;
    }

    /// <summary>
    /// Batch throughput (the median of <see cref="CompareSettings.BatchReps"/> batches after a small warm-up batch) and
    /// single-query throughput (the median of <see cref="CompareSettings.Reps"/> passes after at least a second of
    /// warm-up), each with the recall of its last pass. Returns the batch's result ids (the ground truth, for the exact index).
    /// </summary>
    private static long[] MeasureSearches(
        CompareSettings settings, string kind, IVectorIndex index, SearchOptions? options, int singleQueries, FashionData data, long[]? truth, ResultWriter? output)
    {
        int k = settings.K;
        int d = FashionData.Dimension;

        // Batch first: for the exact index its results are the truth the single-query recall is checked against.
        ReadOnlySpan<float> batch = data.QueryRows(settings.BatchQueries);
        index.SearchBatch(data.QueryRows(Math.Min(500, settings.BatchQueries)), k, options);
        var batchRates = new double[output is null ? 1 : settings.BatchReps];
        BatchSearchResults? results = null;
        for (int rep = 0; rep < batchRates.Length; rep++)
        {
            Collect();
            var timer = Stopwatch.StartNew();
            results = index.SearchBatch(batch, k, options);
            batchRates[rep] = settings.BatchQueries / timer.Elapsed.TotalSeconds;
            Log($"{settings.Label}: {kind} batch {rep + 1}/{batchRates.Length}: {batchRates[rep]:F1} queries/s");
        }

        long[] batchIds = Ids(results!, k);
        truth ??= batchIds;
        if (output is null)
        {
            return batchIds;
        }

        output.Write(kind, "batch_queries", settings.BatchQueries);
        output.Write(kind, "batch_qps", Median(batchRates));
        output.Write(kind, "batch_recall", Recall(batchIds, truth, settings.BatchQueries, k));

        var hits = new SearchHit[k];
        var found = new long[singleQueries * k];
        var warmUp = Stopwatch.StartNew();
        for (int pass = 0; pass == 0 || warmUp.Elapsed < s_minimumWarmUp; pass++)
        {
            for (int q = 0; q < Math.Min(singleQueries, 200); q++)
            {
                index.Search(data.Queries.AsSpan(q * d, d), hits, options);
            }
        }

        var singleRates = new double[settings.Reps];
        for (int rep = 0; rep < settings.Reps; rep++)
        {
            Collect();
            var timer = Stopwatch.StartNew();
            for (int q = 0; q < singleQueries; q++)
            {
                int n = index.Search(data.Queries.AsSpan(q * d, d), hits, options);
                Span<long> slots = found.AsSpan(q * k, k);
                slots.Fill(-1);
                for (int i = 0; i < n; i++)
                {
                    slots[i] = hits[i].Id;
                }
            }

            singleRates[rep] = singleQueries / timer.Elapsed.TotalSeconds;
            Log($"{settings.Label}: {kind} single {rep + 1}/{settings.Reps}: {singleRates[rep]:F1} queries/s");
        }

        output.Write(kind, "single_queries", singleQueries);
        output.Write(kind, "single_qps", Median(singleRates));
        output.Write(kind, "single_recall", Recall(found, truth, singleQueries, k));
        return batchIds;
    }

    /// <summary>Recall@k over the first <paramref name="queries"/> queries: the share of true k nearest ids found.</summary>
    private static double Recall(long[] found, long[] truth, int queries, int k)
    {
        long hits = 0;
        for (int q = 0; q < queries; q++)
        {
            ReadOnlySpan<long> expected = truth.AsSpan(q * k, k);
            ReadOnlySpan<long> got = found.AsSpan(q * k, k);
            foreach (long id in got)
            {
                if (id >= 0 && expected.Contains(id))
                {
                    hits++;
                }
            }
        }

        return (double)hits / ((long)queries * k);
    }

    /// <summary>FNV-1a over the ids' bytes, cut to 31 bits so it prints as an exact integer.</summary>
    private static double Hash(long[] ids)
    {
        uint hash = 2166136261;
        foreach (long id in ids)
        {
            for (int shift = 0; shift < 64; shift += 8)
            {
                hash = (hash ^ (byte)(id >> shift)) * 16777619;
            }
        }

        return hash & 0x7FFF_FFFF;
    }

    /// <summary>Result ids, k slots per query, -1 where a query found fewer.</summary>
    private static long[] Ids(BatchSearchResults results, int k)
    {
        var ids = new long[results.QueryCount * k];
        ids.AsSpan().Fill(-1);
        for (int q = 0; q < results.QueryCount; q++)
        {
            ReadOnlySpan<SearchHit> hits = results[q];
            for (int i = 0; i < hits.Length; i++)
            {
                ids[(q * k) + i] = hits[i].Id;
            }
        }

        return ids;
    }

    /// <summary>Ids 0 … count − 1: an item's id is its row in the training file.</summary>
    private static long[] Ids(int count)
    {
        var ids = new long[count];
        for (int i = 0; i < count; i++)
        {
            ids[i] = i;
        }

        return ids;
    }

    internal static double Median(double[] values)
    {
        double[] sorted = [.. values];
        Array.Sort(sorted);
        int middle = sorted.Length / 2;
        return sorted.Length % 2 == 1 ? sorted[middle] : (sorted[middle - 1] + sorted[middle]) / 2;
    }

    private static void Collect()
    {
        GC.Collect();
        GC.WaitForPendingFinalizers();
        GC.Collect();
    }

    private static void Log(string message) => Console.Error.WriteLine(message);
}
