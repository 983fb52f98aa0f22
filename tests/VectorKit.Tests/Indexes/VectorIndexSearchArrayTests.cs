using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Tests.Indexes.Contract;

namespace VectorKit.Tests.Indexes;

/// <summary>The array-returning <see cref="VectorIndexExtensions.Search(IVectorIndex, ReadOnlySpan{float}, int, SearchOptions?)"/> beside writes.</summary>
public sealed class VectorIndexSearchArrayTests
{
    private const int Dim = 8;

    /// <summary>
    /// Found by the concurrent stress run: the overload sized its buffer by the count read before the search took the
    /// index's lock, so items added in between were cut off (two hits of ten asked, with twelve items held). Here a
    /// writer's adds land exactly there, deterministically; the answer must be the reference's top ten over all items.
    /// </summary>
    [Fact]
    public void Items_added_between_the_count_and_the_search_are_not_cut_off()
    {
        float[] rows = ContractData.Rows(12, Dim, seed: 5);
        using var inner = new ExactIndex(Dim, DistanceMetric.SquaredEuclidean);
        inner.AddRange([0, 1], rows.AsSpan(0, 2 * Dim));
        using var index = new AddsAfterCount(inner, () => inner.AddRange(Enumerable.Range(2, 10).Select(i => (long)i).ToArray(), rows.AsSpan(2 * Dim)));
        var reference = new NaiveIndex(Dim, DistanceMetric.SquaredEuclidean);
        for (int i = 0; i < 12; i++)
        {
            reference.Add(i, rows.AsSpan(i * Dim, Dim));
        }

        float[] query = ContractData.Rows(1, Dim, seed: 6);
        SearchHit[] hits = index.Search(query, 10);

        Assert.Equal(reference.Ranked(query).Take(10).Select(t => t.Id), hits.Select(h => h.Id));
    }

    /// <summary>An index whose first <see cref="Count"/> read is followed at once by a write, as a concurrent writer's could be.</summary>
    private sealed class AddsAfterCount(IVectorIndex inner, Action write) : IVectorIndex
    {
        private Action? _write = write;

        public int Count
        {
            get
            {
                int count = inner.Count;
                Interlocked.Exchange(ref _write, null)?.Invoke();
                return count;
            }
        }

        public int Dimension => inner.Dimension;

        public DistanceMetric Metric => inner.Metric;

        public VectorIndexOptions Options => inner.Options;

        public long MemoryBytes => inner.MemoryBytes;

        public int CodeBytesPerVector => inner.CodeBytesPerVector;

        public bool Contains(long id) => inner.Contains(id);

        public bool TryGetVector(long id, Span<float> destination) => inner.TryGetVector(id, destination);

        public long[] GetIds() => inner.GetIds();

        public void Add(long id, ReadOnlySpan<float> vector) => inner.Add(id, vector);

        public void AddRange(ReadOnlySpan<long> ids, ReadOnlySpan<float> vectors, IProgress<int>? progress = null, CancellationToken cancellationToken = default)
            => inner.AddRange(ids, vectors, progress, cancellationToken);

        public bool AddOrReplace(long id, ReadOnlySpan<float> vector) => inner.AddOrReplace(id, vector);

        public int AddOrReplaceRange(ReadOnlySpan<long> ids, ReadOnlySpan<float> vectors, IProgress<int>? progress = null, CancellationToken cancellationToken = default)
            => inner.AddOrReplaceRange(ids, vectors, progress, cancellationToken);

        public void Remove(long id) => inner.Remove(id);

        public void RemoveRange(ReadOnlySpan<long> ids) => inner.RemoveRange(ids);

        public void Compact(IProgress<int>? progress = null, CancellationToken cancellationToken = default) => inner.Compact(progress, cancellationToken);

        public int Search(ReadOnlySpan<float> query, Span<SearchHit> destination, SearchOptions? options = null) => inner.Search(query, destination, options);

        public BatchSearchResults SearchBatch(ReadOnlySpan<float> queries, int k, SearchOptions? options = null, IProgress<int>? progress = null, CancellationToken cancellationToken = default)
            => inner.SearchBatch(queries, k, options, progress, cancellationToken);

        public void Dispose()
        {
        }
    }
}
