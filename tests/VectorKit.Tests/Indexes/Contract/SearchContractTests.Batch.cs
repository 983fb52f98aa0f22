using VectorKit.Distance;
using VectorKit.Indexes;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>SearchBatch: the same answers as single searches, any k, progress, cancellation, enumeration.</summary>
public abstract partial class SearchContractTests
{
    [Theory]
    [MemberData(nameof(Metrics))]
    public void SearchBatch_EqualsSingleSearches(DistanceMetric metric)
    {
        using Filled filled = Fill(metric, 800);
        float[] queries = Queries(37);
        SearchOptions[] runs =
        [
            SearchOptions.Default,
            WideSearch,
            new SearchOptions { Filter = id => id % 3 != 0 },
            new SearchOptions { Filter = id => (id & 15) == 2, SearchWidth = WideSearch.SearchWidth, MaxDegreeOfParallelism = 2 },
        ];
        foreach (SearchOptions options in runs)
        {
            foreach (int k in new[] { 1, K, 60 })
            {
                BatchSearchResults batch = filled.Index.SearchBatch(queries, k, options);
                Assert.Equal(37, batch.QueryCount);
                for (int q = 0; q < 37; q++)
                {
                    SearchHit[] single = filled.Index.Search(queries.AsSpan(q * Dim, Dim), k, options);
                    Assert.Equal(single, batch[q].ToArray());
                }
            }
        }
    }

    [Fact]
    public void SearchBatch_WithKAtIntMax_ReturnsEverything()
    {
        using Filled filled = Fill(DistanceMetric.SquaredEuclidean, 60);
        float[] queries = Queries(4);
        BatchSearchResults batch = filled.Index.SearchBatch(queries, int.MaxValue, WideSearch);
        Assert.Equal(4, batch.QueryCount);
        for (int q = 0; q < 4; q++)
        {
            Assert.Equal(filled.Ids.Order(), batch[q].ToArray().Select(h => h.Id).Order());
            AssertBestFirst(batch[q]);
        }

        BatchSearchResults more = filled.Index.SearchBatch(queries, 61, WideSearch);
        Assert.All(Enumerable.Range(0, 4), q => Assert.Equal(60, more[q].Length));
    }

    [Fact]
    public void SearchBatch_EnumeratesTheQueriesInOrder()
    {
        using Filled filled = Fill(DistanceMetric.SquaredEuclidean, 300);
        float[] queries = Queries(9);
        BatchSearchResults batch = filled.Index.SearchBatch(queries, K);
        int q = 0;
        foreach (ReadOnlyMemory<SearchHit> hits in batch)
        {
            Assert.Equal(batch[q].ToArray(), hits.ToArray());
            Assert.Equal(K, hits.Length);
            q++;
        }

        Assert.Equal(9, q);
        Assert.Equal(batch.Select(m => m.Length), Enumerable.Repeat(K, 9));
    }

    [Fact]
    public void SearchBatch_ReportsProgressUpToTheQueryCount()
    {
        using Filled filled = Fill(DistanceMetric.SquaredEuclidean, 300);
        float[] queries = Queries(150);
        int most = 0;
        var progress = new SynchronousProgress<int>(done =>
        {
            int seen;
            while ((seen = Volatile.Read(ref most)) < done && Interlocked.CompareExchange(ref most, done, seen) != seen)
            {
            }
        });
        filled.Index.SearchBatch(queries, K, new SearchOptions { MaxDegreeOfParallelism = 2 }, progress);
        Assert.Equal(150, Volatile.Read(ref most));
    }

    [Fact]
    public void SearchBatch_WithACancelledToken_Throws()
    {
        using Filled filled = Fill(DistanceMetric.SquaredEuclidean, 300);
        using var cancelled = new CancellationTokenSource();
        cancelled.Cancel();
        Assert.ThrowsAny<OperationCanceledException>(() => filled.Index.SearchBatch(Queries(20), K, null, null, cancelled.Token));
        Assert.ThrowsAny<OperationCanceledException>(() => filled.Index.SearchBatch(Queries(20), K, WideSearch, null, cancelled.Token));
    }
}
