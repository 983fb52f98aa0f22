namespace VectorKit.Indexes;

/// <summary>The results of a batch search: for each query, up to <see cref="K"/> hits, best first.</summary>
/// <remarks>Stored flat, <see cref="K"/> slots per query, so a batch of a million queries is two arrays, not a million.</remarks>
public sealed class BatchSearchResults
{
    private readonly SearchHit[] _hits;
    private readonly int[] _counts;

    internal BatchSearchResults(int queryCount, int k)
    {
        QueryCount = queryCount;
        K = k;
        _hits = new SearchHit[checked(queryCount * k)];
        _counts = new int[queryCount];
    }

    /// <summary>The number of queries searched.</summary>
    public int QueryCount { get; }

    /// <summary>The number of results asked for per query (slots reserved per query).</summary>
    public int K { get; }

    /// <summary>The hits of query <paramref name="queryIndex"/>, best first; may be fewer than <see cref="K"/>.</summary>
    /// <param name="queryIndex">Zero-based position of the query in the batch.</param>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="queryIndex"/> is outside [0, <see cref="QueryCount"/>).</exception>
    public ReadOnlySpan<SearchHit> this[int queryIndex]
    {
        get
        {
            if ((uint)queryIndex >= (uint)QueryCount)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(queryIndex), queryIndex, $"must be in [0, {QueryCount})");
            }

            return new ReadOnlySpan<SearchHit>(_hits, queryIndex * K, _counts[queryIndex]);
        }
    }

    /// <summary>The slots of one query, for the index that fills them.</summary>
    internal Span<SearchHit> Slots(int queryIndex) => new(_hits, queryIndex * K, K);

    /// <summary>Records how many of a query's slots were filled.</summary>
    internal void SetCount(int queryIndex, int count) => _counts[queryIndex] = count;
}
