using VectorKit.Distance;
using VectorKit.Indexes;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>Remove and RemoveRange: removed ids are gone everywhere; a bad batch removes nothing.</summary>
public abstract partial class IndexContractTests
{
    [Theory]
    [MemberData(nameof(Metrics))]
    public void Remove_TakesTheItemOutOfResultsIdsAndContains(DistanceMetric metric)
    {
        using Filled filled = Fill(metric, 600);
        IVectorIndex index = filled.Index;
        var removed = new HashSet<long>();
        for (int i = 0; i < 600; i += 7)
        {
            index.Remove(filled.Ids[i]);
            removed.Add(filled.Ids[i]);
        }

        long[] batch = filled.Ids.Where((_, i) => i % 7 != 0 && i % 5 == 0).ToArray();
        index.RemoveRange(batch);
        removed.UnionWith(batch);
        foreach (long id in removed)
        {
            filled.Reference.Remove(id);
        }

        Assert.Equal(600 - removed.Count, index.Count);
        Assert.Equal(filled.Ids.Where(id => !removed.Contains(id)).Order(), index.GetIds());
        var vector = new float[Dim];
        foreach (long id in removed)
        {
            Assert.False(index.Contains(id));
            Assert.False(index.TryGetVector(id, vector));
            Assert.Throws<KeyNotFoundException>(() => index.Remove(id));
        }

        // Searching at a removed item's own vector is where it would surface if it were still reachable.
        foreach (long id in removed.Take(40))
        {
            float[] query = filled.VectorOf(id);
            SearchHit[] hits = index.Search(query, K, WideSearch);
            Assert.DoesNotContain(hits, h => removed.Contains(h.Id));
            AssertBestFirst(hits);
            if (IsExact)
            {
                Assert.Equal(filled.Reference.Ranked(query).Take(K).Select(t => t.Id), hits.Select(h => h.Id));
            }
        }

        BatchSearchResults all = index.SearchBatch(filled.Data, int.MaxValue, WideSearch);
        foreach (ReadOnlyMemory<SearchHit> hits in all)
        {
            Assert.DoesNotContain(hits.ToArray(), h => removed.Contains(h.Id));
        }
    }

    [Fact]
    public void RemoveRange_WithAMissingOrRepeatedId_RemovesNothing()
    {
        using Filled filled = Fill(DistanceMetric.SquaredEuclidean, 200);
        IVectorIndex index = filled.Index;
        float[] queries = Queries(3);
        string before = Snapshot(index, queries);
        long[] ids = filled.Ids;

        Assert.Throws<KeyNotFoundException>(() => index.RemoveRange([ids[0], ids[1], 424242, ids[2]]));
        Assert.Equal(before, Snapshot(index, queries));

        Assert.Throws<KeyNotFoundException>(() => index.RemoveRange([424242]));
        Assert.Equal(before, Snapshot(index, queries));

        var repeated = Assert.ThrowsAny<ArgumentException>(() => index.RemoveRange([ids[3], ids[4], ids[3]]));
        Assert.IsNotType<KeyNotFoundException>(repeated);
        Assert.Equal(before, Snapshot(index, queries));

        index.RemoveRange([ids[3], ids[4]]);
        Assert.Equal(198, index.Count);
        index.RemoveRange([]);
        Assert.Equal(198, index.Count);
    }
}
