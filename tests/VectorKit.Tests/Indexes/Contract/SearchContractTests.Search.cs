using VectorKit.Distance;
using VectorKit.Indexes;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>Searches against the reference: order, distances, ids or recall, filters, k beyond the count.</summary>
public abstract partial class SearchContractTests
{
    private const int SearchItems = 2000;
    private const int SearchQueries = 40;

    [Theory]
    [MemberData(nameof(Metrics))]
    public void Search_ResultsAreBestFirst_AndAgreeWithTheReference(DistanceMetric metric)
    {
        using Filled filled = Fill(metric, SearchItems);
        float[] queries = Queries(SearchQueries);
        double recall = 0;
        for (int r = 0; r < SearchQueries; r++)
        {
            float[] query = Row(queries, r);
            List<(long Id, double Distance)> truth = filled.Reference.Ranked(query).Take(K).ToList();

            SearchHit[] hits = filled.Index.Search(query, K);
            Assert.Equal(K, hits.Length);
            AssertBestFirst(hits);
            AssertDistances(filled.Index, query, hits, filled);
            if (IsExact)
            {
                Assert.Equal(truth.Select(t => t.Id), hits.Select(h => h.Id));
            }

            SearchHit[] wide = filled.Index.Search(query, K, WideSearch);
            AssertBestFirst(wide);
            AssertDistances(filled.Index, query, wide, filled);
            recall += wide.Select(h => h.Id).Intersect(truth.Select(t => t.Id)).Count() / (double)K;
        }

        recall /= SearchQueries;
        Assert.True(recall >= RecallFloor, $"recall@{K} {recall:F3} under the wide search is below the floor {RecallFloor}");
    }

    [Theory]
    [MemberData(nameof(Metrics))]
    public void Search_WithAFilter_ReturnsOnlyPassingItems(DistanceMetric metric)
    {
        using Filled filled = Fill(metric, 600);
        float[] queries = Queries(10);
        var options = new SearchOptions { Filter = id => (id & 3) == 1, SearchWidth = WideSearch.SearchWidth };
        for (int r = 0; r < 10; r++)
        {
            float[] query = Row(queries, r);
            SearchHit[] hits = filled.Index.Search(query, K, options);
            Assert.NotEmpty(hits);
            Assert.All(hits, h => Assert.Equal(1, h.Id & 3));
            AssertBestFirst(hits);
            AssertDistances(filled.Index, query, hits, filled);
            if (IsExact)
            {
                Assert.Equal(filled.Reference.Ranked(query, options.Filter).Take(K).Select(t => t.Id), hits.Select(h => h.Id));
            }

            Assert.Empty(filled.Index.Search(query, K, new SearchOptions { Filter = _ => false }));
        }
    }

    [Fact]
    public void Search_ForMoreThanTheCount_ReturnsEveryItem()
    {
        using Filled filled = Fill(DistanceMetric.SquaredEuclidean, 30);
        float[] query = Row(Queries(1), 0);
        var destination = new SearchHit[50];
        int found = filled.Index.Search(query, destination, WideSearch);
        Assert.Equal(30, found);
        AssertBestFirst(destination.AsSpan(0, found));
        Assert.Equal(filled.Ids.Order(), destination.Take(found).Select(h => h.Id).Order());
    }

    [Theory]
    [MemberData(nameof(Metrics))]
    public void Search_OnAnEmptyIndex_FindsNothing(DistanceMetric metric)
    {
        using IVectorIndex index = Create(Dim, metric);
        float[] queries = Queries(3);
        Assert.Equal(0, index.Search(Row(queries, 0), new SearchHit[K]));
        BatchSearchResults batch = index.SearchBatch(queries, K);
        Assert.Equal(3, batch.QueryCount);
        for (int q = 0; q < 3; q++)
        {
            Assert.Equal(0, batch[q].Length);
        }
    }
}
