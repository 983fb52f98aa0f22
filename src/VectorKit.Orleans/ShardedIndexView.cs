using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;

namespace VectorKit.Orleans;

/// <summary>
/// A read-only <see cref="IVectorIndex"/> over a sharded collection, so code written against one index runs on the
/// cluster; in particular <see cref="VectorKit.Reranking.RerankingPipeline{TQuery}"/> and
/// <see cref="VectorKit.Reranking.RerankingCalibration"/> retrieve their candidates through the scatter–gather search
/// (the merged global top k), and read full vectors for the exact stage from the shards.
/// </summary>
/// <remarks>
/// <para>Each call blocks on the cluster: use it from thread-pool code, never from inside a grain.</para>
/// <para>Writes (<see cref="Add"/>, <see cref="AddRange"/>, <see cref="AddOrReplace"/>, <see cref="AddOrReplaceRange"/>,
/// <see cref="Remove"/>, <see cref="RemoveRange"/>) and <see cref="Compact"/> throw
/// <see cref="NotSupportedException"/>: write through <see cref="ShardedVectorCollection.UpsertAsync"/>.
/// <see cref="SearchBatch"/> runs one scatter–gather per query; <see cref="ShardedVectorCollection.SearchBatchAsync"/>
/// batches per shard. A search filter given as a delegate cannot travel
/// to the shards: the view asks the shards for <see cref="FilterDepth"/> hits per query and applies the delegate to
/// the merged list, which is exact only when that many merged hits hold k passing items; prefer an
/// <see cref="IdFilter"/> in <see cref="ShardedSearchOptions"/>.</para>
/// <para>Thread-safe. <see cref="Count"/> and <see cref="GetIds"/> ask every shard each time.</para>
/// </remarks>
public sealed class ShardedIndexView : IVectorIndex
{
    private readonly ShardedVectorCollection _collection;
    private readonly ShardedSearchOptions _search;
    private readonly VectorIndexOptions _options;

    internal ShardedIndexView(ShardedVectorCollection collection, ShardedSearchOptions search)
    {
        _collection = collection;
        _search = search;
        ShardedCollectionDefinition d = collection.Definition;
        _options = d.IndexKind == ShardIndexKind.Graph ? StandardEmptyShardBuilder.GraphOptions(d) : ExactIndexOptions.Default;
    }

    /// <summary>How many merged hits a delegate-filtered search fetches before filtering.</summary>
    public int FilterDepth { get; init; } = 1000;

    /// <inheritdoc />
    public int Dimension => _collection.Definition.Dimension;

    /// <inheritdoc />
    public DistanceMetric Metric => _collection.Definition.Metric;

    /// <inheritdoc />
    public VectorIndexOptions Options => _options;

    /// <inheritdoc />
    public int Count => checked((int)_collection.CountAsync().GetAwaiter().GetResult());

    /// <summary>Not known across the cluster: always 0.</summary>
    public long MemoryBytes => 0;

    /// <inheritdoc />
    public int CodeBytesPerVector => Dimension * sizeof(float);

    /// <inheritdoc />
    public bool Contains(long id) => _collection.GetVectorAsync(id).GetAwaiter().GetResult() is not null;

    /// <inheritdoc />
    public bool TryGetVector(long id, Span<float> destination)
    {
        if (destination.Length != Dimension)
        {
            throw new ArgumentException($"destination has {destination.Length} elements; the dimension is {Dimension}.", nameof(destination));
        }

        float[]? vector = _collection.GetVectorAsync(id).GetAwaiter().GetResult();
        if (vector is null)
        {
            return false;
        }

        vector.CopyTo(destination);
        return true;
    }

    /// <inheritdoc />
    public long[] GetIds() => _collection.GetIdsAsync().GetAwaiter().GetResult();

    /// <inheritdoc />
    public int Search(ReadOnlySpan<float> query, Span<SearchHit> destination, SearchOptions? options = null)
    {
        if (destination.IsEmpty)
        {
            throw new ArgumentException("destination is empty; it needs room for at least one result.", nameof(destination));
        }

        Func<long, bool>? filter = options?.Filter;
        int k = filter is null ? destination.Length : Math.Max(destination.Length, FilterDepth);
        var search = new ShardedSearchOptions
        {
            SearchWidth = options?.SearchWidth ?? _search.SearchWidth,
            Filter = _search.Filter,
            Timeout = _search.Timeout,
            AllowPartial = _search.AllowPartial,
        };
        (SearchHit[] hits, _) = _collection.SearchAsync(query.ToArray(), k, search).GetAwaiter().GetResult();
        int written = 0;
        foreach (SearchHit hit in hits)
        {
            if (written == destination.Length)
            {
                break;
            }

            if (filter is null || filter(hit.Id))
            {
                destination[written++] = hit;
            }
        }

        return written;
    }

    /// <summary>
    /// Searches the queries one after another through <see cref="Search"/> (each a scatter–gather over the shards); for
    /// throughput, <see cref="ShardedVectorCollection.SearchBatchAsync"/> sends the whole batch to each shard at once.
    /// </summary>
    /// <exception cref="ArgumentException"><paramref name="queries"/> is not a whole number of rows of <see cref="Dimension"/>.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="k"/> is not positive.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled (checked between queries).</exception>
    public BatchSearchResults SearchBatch(ReadOnlySpan<float> queries, int k, SearchOptions? options = null, IProgress<int>? progress = null, CancellationToken cancellationToken = default)
    {
        ArgumentOutOfRangeException.ThrowIfNegativeOrZero(k);
        if (queries.Length % Dimension != 0)
        {
            throw new ArgumentException($"queries has {queries.Length} elements, not a whole number of rows of {Dimension}.", nameof(queries));
        }

        int count = queries.Length / Dimension;
        var hits = new ReadOnlyMemory<SearchHit>[count];
        var buffer = new SearchHit[k];
        for (int q = 0; q < count; q++)
        {
            cancellationToken.ThrowIfCancellationRequested();
            int written = Search(queries.Slice(q * Dimension, Dimension), buffer, options);
            hits[q] = buffer.AsSpan(0, written).ToArray();
            progress?.Report(q + 1);
        }

        return BatchSearchResults.Create(k, hits);
    }

    /// <summary>Not supported: the view is read-only.</summary>
    /// <exception cref="NotSupportedException">Always.</exception>
    public void Add(long id, ReadOnlySpan<float> vector) => throw ReadOnlyView(nameof(Add), nameof(ShardedVectorCollection.UpsertAsync));

    /// <summary>Not supported: the view is read-only.</summary>
    /// <exception cref="NotSupportedException">Always.</exception>
    public void AddRange(ReadOnlySpan<long> ids, ReadOnlySpan<float> vectors, IProgress<int>? progress = null, CancellationToken cancellationToken = default)
        => throw ReadOnlyView(nameof(AddRange), nameof(ShardedVectorCollection.UpsertAsync));

    /// <summary>Not supported: the view is read-only.</summary>
    /// <exception cref="NotSupportedException">Always.</exception>
    public bool AddOrReplace(long id, ReadOnlySpan<float> vector) => throw ReadOnlyView(nameof(AddOrReplace), nameof(ShardedVectorCollection.UpsertAsync));

    /// <summary>Not supported: the view is read-only.</summary>
    /// <exception cref="NotSupportedException">Always.</exception>
    public int AddOrReplaceRange(ReadOnlySpan<long> ids, ReadOnlySpan<float> vectors, IProgress<int>? progress = null, CancellationToken cancellationToken = default)
        => throw ReadOnlyView(nameof(AddOrReplaceRange), nameof(ShardedVectorCollection.UpsertAsync));

    /// <summary>Not supported: the view is read-only.</summary>
    /// <exception cref="NotSupportedException">Always.</exception>
    public void Remove(long id) => throw ReadOnlyView(nameof(Remove), nameof(ShardedVectorCollection.RemoveAsync));

    /// <summary>Not supported: the view is read-only.</summary>
    /// <exception cref="NotSupportedException">Always.</exception>
    public void RemoveRange(ReadOnlySpan<long> ids) => throw ReadOnlyView(nameof(RemoveRange), nameof(ShardedVectorCollection.RemoveAsync));

    /// <summary>Not supported: each shard's primary owns its index.</summary>
    /// <exception cref="NotSupportedException">Always.</exception>
    public void Compact(IProgress<int>? progress = null, CancellationToken cancellationToken = default) => throw ReadOnlyView(nameof(Compact), "the shards' own maintenance");

    /// <summary>Nothing to release: the view holds no data.</summary>
    public void Dispose()
    {
    }

    private static NotSupportedException ReadOnlyView(string member, string instead)
        => new($"{nameof(ShardedIndexView)} is a read-only view of a sharded collection: {member} is not supported; use {instead}.");
}
