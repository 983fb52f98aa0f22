using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;
using FsCheck;
using FsCheck.Xunit;
using VectorKit.Indexes;
using Xunit;

namespace VectorKit.Tests.Indexes;

/// <summary>
/// <see cref="BatchSearchResults"/> as a list: each element must equal the span indexer's row (the reference), be a
/// view of the same storage, and the struct enumerator must visit every query once without allocating.
/// </summary>
public sealed class BatchSearchResultsTests
{
    // Builds results directly: query q gets counts[q] hits with ids q * 100 + rank, so every slot is recognisable.
    internal static BatchSearchResults Make(int k, params int[] counts)
    {
        var results = new BatchSearchResults(counts.Length, k);
        for (int q = 0; q < counts.Length; q++)
        {
            Span<SearchHit> slots = results.Slots(q);
            for (int r = 0; r < counts[q]; r++)
            {
                slots[r] = new SearchHit((q * 100L) + r, r * 0.5f);
            }

            results.SetCount(q, counts[q]);
        }

        return results;
    }

    [Property(MaxTest = 60)]
    public void List_view_matches_the_span_indexer(PositiveInt kSeed, byte[] countSeeds)
    {
        int k = 1 + (kSeed.Get % 9);
        int[] counts = (countSeeds ?? []).Select(c => c % (k + 1)).ToArray();
        BatchSearchResults results = Make(k, counts);
        IReadOnlyList<ReadOnlyMemory<SearchHit>> list = results;

        Assert.Equal(counts.Length, list.Count);
        for (int q = 0; q < counts.Length; q++)
        {
            Assert.Equal(results[q].ToArray(), list[q].ToArray());
            Assert.Equal(results[q].ToArray(), results.AsMemory(q).ToArray());
        }

        var visited = new List<SearchHit[]>();
        foreach (ReadOnlyMemory<SearchHit> hits in results)
        {
            visited.Add(hits.ToArray());
        }

        Assert.Equal(Enumerable.Range(0, counts.Length).Select(q => results[q].ToArray()), visited);
        Assert.Equal(counts, list.Select(m => m.Length)); // through IEnumerable<T>, as LINQ sees it
    }

    [Fact]
    public void Elements_are_views_of_one_array_not_copies()
    {
        BatchSearchResults results = Make(4, 3, 0, 4);
        Assert.True(MemoryMarshal.TryGetArray(results.AsMemory(0), out ArraySegment<SearchHit> first));
        Assert.True(MemoryMarshal.TryGetArray(((IReadOnlyList<ReadOnlyMemory<SearchHit>>)results)[2], out ArraySegment<SearchHit> third));
        Assert.Same(first.Array, third.Array);
        Assert.Equal((0, 3), (first.Offset, first.Count));
        Assert.Equal((8, 4), (third.Offset, third.Count));
        Assert.True(Unsafe.AreSame(in results[2][0], in results.AsMemory(2).Span[0]));
    }

    [Fact]
    public void Foreach_over_the_struct_enumerator_does_not_allocate()
    {
        BatchSearchResults results = Make(5, 5, 2, 0, 5, 1);
        long total = SumIds(results); // warm up: the first call may JIT
        long before = GC.GetAllocatedBytesForCurrentThread();
        for (int i = 0; i < 100; i++)
        {
            total += SumIds(results);
        }

        Assert.Equal(0, GC.GetAllocatedBytesForCurrentThread() - before);
        Assert.True(total > 0);
    }

    [Fact]
    public void Enumerator_resets_and_stops_at_the_end()
    {
        BatchSearchResults results = Make(2, 2, 1);
        BatchSearchResults.Enumerator e = results.GetEnumerator();
        Assert.True(e.MoveNext());
        Assert.True(e.MoveNext());
        Assert.Equal(1, e.Current.Length);
        Assert.False(e.MoveNext());
        Assert.False(e.MoveNext());
        Assert.True(e.Current.IsEmpty);
        e.Reset();
        Assert.True(e.MoveNext());
        Assert.Equal(2, e.Current.Length);
    }

    [Theory]
    [InlineData(-1)]
    [InlineData(2)]
    public void Out_of_range_query_is_named_with_the_valid_range(int queryIndex)
    {
        BatchSearchResults results = Make(2, 2, 1);
        IReadOnlyList<ReadOnlyMemory<SearchHit>> list = results;
        var viaList = Assert.Throws<ArgumentOutOfRangeException>(() => list[queryIndex]);
        var viaMemory = Assert.Throws<ArgumentOutOfRangeException>(() => results.AsMemory(queryIndex));
        Assert.Equal("queryIndex", viaList.ParamName);
        Assert.Contains($"queryIndex must be in [0, 2); got {queryIndex}.", viaList.Message);
        Assert.Equal(viaList.Message, viaMemory.Message);
    }

    [Fact]
    public void Create_copies_each_querys_hits_and_checks_k()
    {
        SearchHit[] first = [new SearchHit(4, 0.5f), new SearchHit(9, 1.5f)];
        var results = BatchSearchResults.Create(3, [first, ReadOnlyMemory<SearchHit>.Empty, new[] { new SearchHit(2, 0f) }]);
        first[0] = new SearchHit(99, 9f);

        Assert.Equal(3, results.QueryCount);
        Assert.Equal(3, results.K);
        Assert.Equal([new SearchHit(4, 0.5f), new SearchHit(9, 1.5f)], results[0].ToArray());
        Assert.Equal(0, results[1].Length);
        Assert.Equal([new SearchHit(2, 0f)], results[2].ToArray());
        Assert.Throws<ArgumentOutOfRangeException>(() => BatchSearchResults.Create(0, []));
        var tooMany = Assert.Throws<ArgumentException>(() => BatchSearchResults.Create(1, [first]));
        Assert.Contains("Query 0 has 2 hits, more than k (1)", tooMany.Message);
    }

    private static long SumIds(BatchSearchResults results)
    {
        long sum = 0;
        foreach (ReadOnlyMemory<SearchHit> hits in results)
        {
            foreach (SearchHit hit in hits.Span)
            {
                sum += hit.Id;
            }
        }

        return sum;
    }
}
