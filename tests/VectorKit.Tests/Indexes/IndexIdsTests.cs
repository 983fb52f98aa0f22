using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;

namespace VectorKit.Tests.Indexes;

public class IndexIdsTests
{
    public static TheoryData<string> Kinds => new() { "exact", "graph", "inverted-file" };

    [Theory]
    [MemberData(nameof(Kinds))]
    public void GetIds_ListsTheLiveIdsInAscendingOrder(string kind)
    {
        using IVectorIndex index = Create(kind);
        Assert.Empty(index.GetIds());
        long[] ids = [50, -3, 7, 1_000_000_000_000, 12, 0];
        index.AddRange(ids, Enumerable.Range(0, ids.Length * 2).Select(i => (float)i).ToArray());
        index.Remove(7);
        index.Add(8, [1f, 2f]);
        Assert.Equal([-3L, 0, 8, 12, 50, 1_000_000_000_000], index.GetIds());
        index.Dispose();
        Assert.Throws<ObjectDisposedException>(() => index.GetIds());
    }

    private static IVectorIndex Create(string kind)
    {
        switch (kind)
        {
            case "exact":
                return new ExactIndex(2, DistanceMetric.SquaredEuclidean);
            case "graph":
                return new GraphIndex(2, DistanceMetric.SquaredEuclidean);
            default:
                var inverted = new InvertedFileIndex(2, DistanceMetric.SquaredEuclidean, new InvertedFileOptions { ListCount = 2 });
                inverted.Train([0f, 0, 1, 1, 5, 5, 6, 6]);
                return inverted;
        }
    }

    [Fact]
    public void GetIds_OfAnIndexThatCannotListThem_SaysWhatToDoInstead()
    {
        using IVectorIndex index = new WithoutIdList(new ExactIndex(2, DistanceMetric.SquaredEuclidean));
        var e = Assert.Throws<NotSupportedException>(() => index.GetIds());
        Assert.Contains("pass the collection's ids", e.Message);
    }

    // An index kind written before GetIds existed: it still compiles, and the default member explains itself.
    private sealed class WithoutIdList(IVectorIndex inner) : IVectorIndex
    {
        public int Dimension => inner.Dimension;

        public DistanceMetric Metric => inner.Metric;

        public int Count => inner.Count;

        public long MemoryBytes => inner.MemoryBytes;

        public bool Contains(long id) => inner.Contains(id);

        public bool TryGetVector(long id, Span<float> destination) => inner.TryGetVector(id, destination);

        public void Add(long id, ReadOnlySpan<float> vector) => inner.Add(id, vector);

        public void AddRange(ReadOnlySpan<long> ids, ReadOnlySpan<float> vectors) => inner.AddRange(ids, vectors);

        public void Remove(long id) => inner.Remove(id);

        public int Search(ReadOnlySpan<float> query, Span<SearchHit> destination, SearchOptions? options = null) => inner.Search(query, destination, options);

        public BatchSearchResults SearchBatch(ReadOnlySpan<float> queries, int k, SearchOptions? options = null, IProgress<int>? progress = null, CancellationToken cancellationToken = default)
            => inner.SearchBatch(queries, k, options, progress, cancellationToken);

        public void Dispose() => inner.Dispose();
    }
}
