using VectorKit.Distance;
using VectorKit.Distance.Kernels;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using Xunit;

namespace VectorKit.Tests.Indexes;

public class ExactIndexTests
{
    public static TheoryData<DistanceMetric, int, int> MetricsPathsDimensions()
    {
        var data = new TheoryData<DistanceMetric, int, int>();
        foreach (DistanceMetric metric in Enum.GetValues<DistanceMetric>())
        {
            foreach (KernelPath path in Enum.GetValues<KernelPath>().Where(KernelDispatch.IsSupported))
            {
                foreach (int d in new[] { 1, 3, 8, 17, 64, 129 })
                {
                    data.Add(metric, (int)path, d);
                }
            }
        }

        return data;
    }

    [Theory]
    [MemberData(nameof(MetricsPathsDimensions))]
    public void Search_MatchesDoublePrecisionReference(DistanceMetric metric, int kernelPath, int dimension)
    {
        // Integer components keep every float sum exact under L2 and inner product, so the
        // comparison with the double-precision oracle is exact, ties included.
        var random = new Random(1000 + dimension);
        const int n = 301;
        using var index = new ExactIndex(dimension, metric, null, (KernelPath)kernelPath);
        var naive = new NaiveIndex(dimension, metric);
        float[] vectors = RandomIntegers(random, n * dimension, -4, 5);
        for (int r = 0; r < n; r++)
        {
            // Cosine rejects zero vectors; give any all-zero row a direction.
            if (vectors.AsSpan(r * dimension, dimension).IndexOfAnyExcept(0f) < 0)
            {
                vectors[r * dimension] = 1;
            }
        }

        long[] ids = Enumerable.Range(0, n).Select(i => (long)(i * 7919 % 1000)).ToArray();
        index.AddRange(ids, vectors);
        for (int i = 0; i < n; i++)
        {
            naive.Add(ids[i], vectors.AsSpan(i * dimension, dimension));
        }

        for (int t = 0; t < 20; t++)
        {
            float[] query = RandomIntegers(random, dimension, -4, 5);
            if (metric == DistanceMetric.Cosine && query.All(x => x == 0))
            {
                query[0] = 1;
            }

            const int k = 10;
            SearchHit[] hits = index.Search(query, k);
            var expected = naive.Ranked(query).Take(k).ToList();
            AssertSameRanking(metric, expected, hits);
        }
    }

    [Theory]
    [InlineData(DistanceMetric.SquaredEuclidean)]
    [InlineData(DistanceMetric.InnerProduct)]
    [InlineData(DistanceMetric.Cosine)]
    public void SearchBatch_ReturnsExactlyWhatSingleSearchesReturn(DistanceMetric metric)
    {
        // Real-valued data and a dimension with a tail exercise the tiled kernel's re-scoring margin.
        var random = new Random(7);
        const int d = 100, n = 2_003, queries = 131, k = 7;
        using var index = new ExactIndex(d, metric);
        float[] vectors = RandomFloats(random, n * d);
        index.AddRange(Enumerable.Range(0, n).Select(i => (long)i).ToArray(), vectors);
        float[] q = RandomFloats(random, queries * d);

        foreach (int threads in new[] { 1, 2 })
        {
            BatchSearchResults batch = index.SearchBatch(q, k, new SearchOptions { MaxDegreeOfParallelism = threads });
            Assert.Equal(queries, batch.QueryCount);
            for (int i = 0; i < queries; i++)
            {
                SearchHit[] single = index.Search(q.AsSpan(i * d, d), k);
                Assert.Equal(single, batch[i].ToArray());
            }
        }

        // On ordinary data the tiled kernel's candidates are proven complete: single-scan fallbacks stay rare.
        Assert.InRange(index.BatchFallbacks, 0, queries / 10);
    }

    [Fact]
    public void SearchBatch_DataFarFromTheOrigin_StillMatchesSingleSearch()
    {
        // Tight clusters far from the origin: the expansion ‖q‖² + ‖x‖² − 2 q·x cancels away the small distances,
        // so the tiled candidates are wrong; the batch must detect it and still return the exact answer.
        var random = new Random(11);
        const int d = 32, n = 2_000, queries = 64, k = 10;
        float[] Shifted(int length) => RandomFloats(random, length).Select(v => 1000f + (0.01f * v)).ToArray();
        using var index = new ExactIndex(d, DistanceMetric.SquaredEuclidean);
        index.AddRange(Enumerable.Range(0, n).Select(i => (long)i).ToArray(), Shifted(n * d));
        float[] q = Shifted(queries * d);
        BatchSearchResults batch = index.SearchBatch(q, k);
        for (int i = 0; i < queries; i++)
        {
            Assert.Equal(index.Search(q.AsSpan(i * d, d), k), batch[i].ToArray());
        }

        // The tiled kernel's expansion cannot resolve these distances, and its error bound says so: every query
        // falls back to a single scan rather than return a wrong neighbour.
        Assert.Equal(queries, index.BatchFallbacks);
    }

    [Fact]
    public void SearchBatch_WithFilter_MatchesFilteredSingleSearch()
    {
        var random = new Random(8);
        const int d = 24, n = 500, k = 5;
        using var index = new ExactIndex(d, DistanceMetric.SquaredEuclidean);
        index.AddRange(Enumerable.Range(0, n).Select(i => (long)i).ToArray(), RandomFloats(random, n * d));
        float[] q = RandomFloats(random, 40 * d);
        var options = new SearchOptions { Filter = id => id % 10 == 3 };
        BatchSearchResults batch = index.SearchBatch(q, k, options);
        for (int i = 0; i < 40; i++)
        {
            SearchHit[] single = index.Search(q.AsSpan(i * d, d), k, options);
            Assert.Equal(single, batch[i].ToArray());
            Assert.All(single, h => Assert.Equal(3, h.Id % 10));
        }
    }

    [Fact]
    public void Filter_IsAppliedDuringSearch_SoKPassingItemsComeBack()
    {
        // Only 3 % of the items pass; over-fetching and dropping would return far fewer than k.
        var random = new Random(9);
        const int d = 16, n = 1_000;
        using var index = new ExactIndex(d, DistanceMetric.SquaredEuclidean);
        var naive = new NaiveIndex(d, DistanceMetric.SquaredEuclidean);
        float[] vectors = RandomIntegers(random, n * d, -3, 4);
        for (int i = 0; i < n; i++)
        {
            index.Add(i, vectors.AsSpan(i * d, d));
            naive.Add(i, vectors.AsSpan(i * d, d));
        }

        Func<long, bool> filter = id => id % 33 == 0;
        float[] query = RandomIntegers(random, d, -3, 4);
        SearchHit[] hits = index.Search(query, 20, new SearchOptions { Filter = filter });
        AssertSameRanking(DistanceMetric.SquaredEuclidean, naive.Ranked(query, filter).Take(20).ToList(), hits);
    }

    [Fact]
    public void KLargerThanCount_ReturnsEverything_BestFirst()
    {
        using var index = new ExactIndex(2, DistanceMetric.SquaredEuclidean);
        index.Add(5, [3, 0]);
        index.Add(2, [1, 0]);
        index.Add(9, [2, 0]);
        SearchHit[] hits = index.Search([0f, 0f], int.MaxValue);
        Assert.Equal([new SearchHit(2, 1), new SearchHit(9, 4), new SearchHit(5, 9)], hits);
        Assert.Equal(3, index.SearchBatch(new float[] { 0, 0 }, 100)[0].Length);
    }

    [Fact]
    public void Ties_AreBrokenByAscendingId()
    {
        using var index = new ExactIndex(2, DistanceMetric.SquaredEuclidean);
        foreach (long id in new long[] { 40, -3, 17, 8 })
        {
            index.Add(id, [1, 1]);
        }

        Assert.Equal([-3L, 8, 17], index.Search([0f, 0f], 3).Select(h => h.Id));
        Assert.Equal([-3L, 8, 17], index.SearchBatch(new float[] { 0, 0 }, 3)[0].ToArray().Select(h => h.Id));
    }

    [Fact]
    public void Remove_FillsTheHole_AndLaterSearchesNeverSeeTheId()
    {
        using var index = new ExactIndex(1, DistanceMetric.SquaredEuclidean);
        for (int i = 0; i < 10; i++)
        {
            index.Add(i, [i]);
        }

        index.Remove(0);
        index.Remove(5);
        Assert.Equal(8, index.Count);
        Assert.False(index.Contains(5));
        Assert.Equal([1L, 2, 3, 4, 6], index.Search([0f], 5).Select(h => h.Id));
        Span<float> v = stackalloc float[1];
        Assert.True(index.TryGetVector(9, v));
        Assert.Equal(9f, v[0]);
        Assert.False(index.TryGetVector(5, v));
    }

    [Fact]
    public void Cosine_NormalisesOnceAtInsert()
    {
        using var index = new ExactIndex(2, DistanceMetric.Cosine);
        index.Add(1, [3, 4]);
        float[] stored = new float[2];
        Assert.True(index.TryGetVector(1, stored));
        Assert.Equal(0.6f, stored[0], 6);
        Assert.Equal(0.8f, stored[1], 6);
        SearchHit hit = index.Search([30f, 40f], 1)[0];
        Assert.Equal(0f, hit.Distance, 6);
    }

    [Fact]
    public void EmptyIndex_ReturnsNothing()
    {
        using var index = new ExactIndex(3, DistanceMetric.InnerProduct);
        Assert.Empty(index.Search([1f, 2f, 3f], 4));
        Assert.Equal(0, index.SearchBatch(new float[6], 4)[1].Length);
    }

    [Fact]
    public void TrimExcess_KeepsContentAndReducesMemory()
    {
        using var index = new ExactIndex(64, DistanceMetric.SquaredEuclidean);
        var random = new Random(3);
        for (int i = 0; i < 1000; i++)
        {
            index.Add(i, RandomFloats(random, 64));
        }

        float[] query = RandomFloats(random, 64);
        SearchHit[] before = index.Search(query, 10);
        long bytes = index.MemoryBytes;
        index.Compact();
        Assert.True(index.MemoryBytes <= bytes);
        Assert.Equal(before, index.Search(query, 10));
    }

    [Fact]
    public void MemoryOverhead_AfterBulkAdd_IsUnderTenPercent()
    {
        // Issue requirement: N × d × 4 bytes plus ids, overhead under 10 %, at a typical embedding size.
        const int d = 128, n = 20_000;
        using var index = new ExactIndex(d, DistanceMetric.SquaredEuclidean);
        index.AddRange(Enumerable.Range(0, n).Select(i => (long)i).ToArray(), RandomFloats(new Random(1), n * d));
        double payload = (double)n * ((d * sizeof(float)) + sizeof(long));
        Assert.InRange(index.MemoryBytes / payload, 1.0, 1.10);
    }

    [Fact]
    public void SearchBatch_ReportsProgress_AndHonoursCancellation()
    {
        using var index = new ExactIndex(8, DistanceMetric.SquaredEuclidean);
        index.AddRange(Enumerable.Range(0, 100).Select(i => (long)i).ToArray(), RandomFloats(new Random(2), 800));
        float[] queries = RandomFloats(new Random(3), 8 * 1000);
        var seen = new List<int>();
        var progress = new SynchronousProgress(seen);
        index.SearchBatch(queries, 3, null, progress);
        Assert.Equal(1000, seen.Max());

        using var cancelled = new CancellationTokenSource();
        cancelled.Cancel();
        Assert.ThrowsAny<OperationCanceledException>(() => index.SearchBatch(queries, 3, null, null, cancelled.Token));
    }

    [Fact]
    public async Task ConcurrentSearchesAndWrites_NeverSeeATornIndex()
    {
        // Writers add and remove while readers search: every result must be a live id with its exact distance.
        const int d = 8;
        using var index = new ExactIndex(d, DistanceMetric.SquaredEuclidean);
        for (int i = 0; i < 200; i++)
        {
            index.Add(i, Enumerable.Repeat((float)i, d).ToArray());
        }

        using var stop = new CancellationTokenSource();
        var writer = Task.Run(() =>
        {
            for (int round = 0; round < 300; round++)
            {
                long id = 1000 + round;
                index.Add(id, Enumerable.Repeat((float)id, d).ToArray());
                index.Remove(id);
            }
        });
        var readers = Enumerable.Range(0, 2).Select(_ => Task.Run(() =>
        {
            float[] q = new float[d];
            while (!writer.IsCompleted)
            {
                foreach (SearchHit hit in index.Search(q, 5))
                {
                    Assert.Equal((float)(hit.Id * hit.Id * d), hit.Distance);
                }
            }
        })).ToArray();
        await Task.WhenAll([writer, .. readers]);
        Assert.Equal(200, index.Count);
    }

    internal static void AssertSameRanking(DistanceMetric metric, List<(long Id, double Distance)> expected, SearchHit[] actual)
    {
        Assert.Equal(expected.Count, actual.Length);
        if (metric == DistanceMetric.Cosine)
        {
            // Cosine divides by norms, so float and double disagree in the last bits: compare distances with a
            // tolerance and require the same ids wherever the reference separates neighbours by more than it.
            for (int i = 0; i < expected.Count; i++)
            {
                Assert.Equal(expected[i].Distance, actual[i].Distance, 1e-5);
            }

            return;
        }

        Assert.Equal(expected.Select(e => e.Id), actual.Select(a => a.Id));
        Assert.Equal(expected.Select(e => (float)e.Distance), actual.Select(a => a.Distance));
    }

    internal static float[] RandomIntegers(Random random, int length, int min, int max)
        => Enumerable.Range(0, length).Select(_ => (float)random.Next(min, max)).ToArray();

    internal static float[] RandomFloats(Random random, int length)
        => Enumerable.Range(0, length).Select(_ => (float)((random.NextDouble() * 2) - 1)).ToArray();

    private sealed class SynchronousProgress(List<int> seen) : IProgress<int>
    {
        public void Report(int value)
        {
            lock (seen)
            {
                seen.Add(value);
            }
        }
    }
}
