using System.Diagnostics;
using System.Runtime.InteropServices;
using VectorKit.Distance;
using VectorKit.Distance.Kernels;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;

namespace VectorKit.Benchmarks.Indexes;

/// <summary>
/// The exact index's batch search on Fashion-MNIST (10,000 test images × 60,000 training images × 784, top 10, squared
/// Euclidean) set against the numpy + OpenBLAS baseline (<c>scripts/numpy-baseline.sh</c>): the distance phase alone
/// (the batch's packed-panel kernel over every query and row, without selection) in GFLOP/s, the same for the older
/// 4 × 4 block kernel, and the whole <c>SearchBatch</c> in queries/s, on 2 threads, in alternating repetitions.
/// </summary>
/// <remarks>
/// Recall@10 is printed beside the speed: against the index's own single-query search (the float32 reference) on the
/// first queries, and against the baseline's top-10 ids on all of them when its file is given.
/// </remarks>
public static class ExactBatchVsBlas
{
    private const int QueryCount = 10_000;
    private const int ItemCount = 60_000;
    private const int K = 10;
    private const int Threads = 2;
    private const int QueryBlock = 96;
    private const int TileRows = 72; // the index's tile at d = 784 (256 KiB of rows, whole multiples of 24 rows)

    public static void Run(int repetitions, int referenceQueries, string? baselineIds)
    {
        int d = TestData.ImageDimension;
        float[] items = TestData.Images(TestData.FashionTrainImages, ItemCount, seed: 7, out string itemSource);
        float[] queries = TestData.Images(TestData.FashionTestImages, QueryCount, seed: 8, out string querySource);
        Console.WriteLine($"items: {itemSource}; queries: {querySource}; kernel path {KernelDispatch.Widest}; {Threads} threads");
        var ids = new long[ItemCount];
        for (int i = 0; i < ids.Length; i++)
        {
            ids[i] = i;
        }

        using var index = new ExactIndex(d, DistanceMetric.SquaredEuclidean, new ExactIndexOptions { InitialCapacity = ItemCount });
        index.AddRange(ids, items);
        double flops = 2.0 * QueryCount * ItemCount * d;
        var options = new SearchOptions { MaxDegreeOfParallelism = Threads };

        // Untimed warm-up of every measured path.
        DistancePhase(items, queries[..(QueryBlock * d)], QueryBlock, d, panel: true);
        DistancePhase(items, queries[..(QueryBlock * d)], QueryBlock, d, panel: false);
        index.SearchBatch(queries.AsSpan(0, 256 * d), K, options);

        var panel = new List<double>();
        var block = new List<double>();
        var endToEnd = new List<double>();
        BatchSearchResults? results = null;
        for (int r = 1; r <= repetitions; r++)
        {
            double panelSeconds = DistancePhase(items, queries, QueryCount, d, panel: true);
            int fallbacksBefore = index.BatchFallbacks;
            var watch = Stopwatch.StartNew();
            results = index.SearchBatch(queries, K, options);
            double batchSeconds = watch.Elapsed.TotalSeconds;
            int fallbacks = index.BatchFallbacks - fallbacksBefore;
            double blockSeconds = DistancePhase(items, queries, QueryCount, d, panel: false);
            panel.Add(flops / panelSeconds / 1e9);
            block.Add(flops / blockSeconds / 1e9);
            endToEnd.Add(QueryCount / batchSeconds);
            Console.WriteLine($"repetition {r}: distance phase, panel kernel {panelSeconds:F3} s = {panel[^1]:F1} GFLOP/s; " +
                $"4x4 block kernel {blockSeconds:F3} s = {block[^1]:F1} GFLOP/s; SearchBatch {batchSeconds:F3} s = {endToEnd[^1]:F0} queries/s " +
                $"({fallbacks} queries fell back to a single scan)");
        }

        Console.WriteLine($"panel kernel GFLOP/s: {Spread(panel)}");
        Console.WriteLine($"4x4 block kernel GFLOP/s: {Spread(block)}");
        Console.WriteLine($"SearchBatch queries/s: {Spread(endToEnd)}");

        // Recall against the float32 reference: the index's own single-query search.
        int matched = 0;
        var hits = new SearchHit[K];
        for (int q = 0; q < referenceQueries; q++)
        {
            int found = index.Search(queries.AsSpan(q * d, d), hits);
            matched += Overlap(results![q], hits.AsSpan(0, found));
        }

        Console.WriteLine($"recall@10 vs single-query search (first {referenceQueries} queries): {matched / (double)(referenceQueries * K):F4}");
        if (baselineIds is not null && File.Exists(baselineIds))
        {
            int[] baseline = MemoryMarshal.Cast<byte, int>(File.ReadAllBytes(baselineIds)).ToArray();
            int baselineQueries = baseline.Length / K;
            int same = 0;
            for (int q = 0; q < baselineQueries; q++)
            {
                ReadOnlySpan<SearchHit> ours = results![q];
                for (int j = 0; j < K; j++)
                {
                    for (int i = 0; i < ours.Length; i++)
                    {
                        if (ours[i].Id == baseline[(q * K) + j])
                        {
                            same++;
                            break;
                        }
                    }
                }
            }

            Console.WriteLine($"recall@10 vs the numpy baseline's ids ({baselineQueries} queries): {same / (double)(baselineQueries * K):F4}");
        }
    }

    // Every query block against every row tile, as the batch search does, without selection: 2 threads take blocks in turn.
    private static double DistancePhase(float[] items, float[] queries, int queryCount, int d, bool panel)
    {
        int blocks = (queryCount + QueryBlock - 1) / QueryBlock;
        int next = -1;
        var watch = Stopwatch.StartNew();
        Parallel.For(0, Threads, new ParallelOptions { MaxDegreeOfParallelism = Threads }, _ =>
        {
            KernelPath path = KernelDispatch.Widest;
            var packed = new float[PanelKernel.PackedLength(path, QueryBlock, d)];
            var output = new float[PanelKernel.PaddedRows(path, TileRows) * PanelKernel.PaddedQueries(path, QueryBlock)];
            int b;
            while ((b = Interlocked.Increment(ref next)) < blocks)
            {
                int first = b * QueryBlock;
                int count = Math.Min(QueryBlock, queryCount - first);
                ReadOnlySpan<float> block = queries.AsSpan(first * d, count * d);
                int stride = PanelKernel.PaddedQueries(path, count);
                if (panel)
                {
                    PanelKernel.Pack(path, block, count, d, packed);
                }

                for (int start = 0; start < ItemCount; start += TileRows)
                {
                    int rows = Math.Min(TileRows, ItemCount - start);
                    if (panel)
                    {
                        PanelKernel.Compute(path, ref packed[0], count, ref items[start * d], rows, d, ref output[0], stride);
                    }
                    else
                    {
                        BlockKernel.Compute<DotStep>(path, ref MemoryMarshal.GetReference(block), count, ref items[start * d], rows, d, ref output[0], TileRows);
                    }
                }
            }
        });
        return watch.Elapsed.TotalSeconds;
    }

    private static int Overlap(ReadOnlySpan<SearchHit> a, ReadOnlySpan<SearchHit> b)
    {
        int same = 0;
        foreach (SearchHit x in a)
        {
            foreach (SearchHit y in b)
            {
                if (x.Id == y.Id)
                {
                    same++;
                    break;
                }
            }
        }

        return same;
    }

    private static string Spread(List<double> values)
    {
        var sorted = values.Order().ToArray();
        return $"min {sorted[0]:F1}, median {sorted[sorted.Length / 2]:F1}, max {sorted[^1]:F1} over {sorted.Length}";
    }
}
