using System.Collections;

namespace VectorKit.Indexes;

/// <summary>The results of a batch search: for each query, up to <see cref="K"/> hits, best first.</summary>
/// <remarks>
/// <para>Stored flat, <see cref="K"/> slots per query, so a batch of a million queries is two arrays, not a million.</para>
/// <para>As an <see cref="IReadOnlyList{T}"/> each element is one query's hits in query order, as a
/// <see cref="ReadOnlyMemory{T}"/> view over the internal array (no copy). <c>foreach</c> over the results uses the
/// struct <see cref="Enumerator"/> and does not allocate. The results never change after the search returns, so the
/// views stay valid for the lifetime of this object.</para>
/// </remarks>
public sealed class BatchSearchResults : IReadOnlyList<ReadOnlyMemory<SearchHit>>
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

    /// <summary>
    /// Results assembled from each query's hits, for an <see cref="IVectorIndex"/> implemented outside the library (for
    /// example one that searches several indexes and merges their answers). The hits are copied.
    /// </summary>
    /// <param name="k">The number of results asked for per query.</param>
    /// <param name="hits">For each query in order, at most <paramref name="k"/> hits, best first.</param>
    /// <returns>The results.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="hits"/> is null.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="k"/> is not positive.</exception>
    /// <exception cref="ArgumentException">A query has more than <paramref name="k"/> hits.</exception>
    public static BatchSearchResults Create(int k, IReadOnlyList<ReadOnlyMemory<SearchHit>> hits)
    {
        ArgumentNullException.ThrowIfNull(hits);
        if (k <= 0)
        {
            ThrowHelper.ThrowArgumentOutOfRange(nameof(k), k, "must be positive");
        }

        var results = new BatchSearchResults(hits.Count, k);
        for (int q = 0; q < hits.Count; q++)
        {
            ReadOnlySpan<SearchHit> query = hits[q].Span;
            if (query.Length > k)
            {
                ThrowHelper.ThrowArgument(nameof(hits), $"Query {q} has {query.Length} hits, more than k ({k}).");
            }

            query.CopyTo(results.Slots(q));
            results.SetCount(q, query.Length);
        }

        return results;
    }

    /// <summary>The number of queries searched.</summary>
    public int QueryCount { get; }

    /// <summary>The number of results asked for per query (slots reserved per query).</summary>
    public int K { get; }

    /// <summary>The number of queries searched: the same as <see cref="QueryCount"/>.</summary>
    int IReadOnlyCollection<ReadOnlyMemory<SearchHit>>.Count => QueryCount;

    /// <summary>The hits of query <paramref name="queryIndex"/>, best first; may be fewer than <see cref="K"/>.</summary>
    /// <param name="queryIndex">Zero-based position of the query in the batch.</param>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="queryIndex"/> is outside [0, <see cref="QueryCount"/>).</exception>
    public ReadOnlySpan<SearchHit> this[int queryIndex]
    {
        get
        {
            CheckQueryIndex(queryIndex);
            return new ReadOnlySpan<SearchHit>(_hits, queryIndex * K, _counts[queryIndex]);
        }
    }

    /// <summary>The hits of query <paramref name="queryIndex"/>, best first, as a view over the internal array (no copy).</summary>
    /// <param name="queryIndex">Zero-based position of the query in the batch.</param>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="queryIndex"/> is outside [0, <see cref="QueryCount"/>).</exception>
    ReadOnlyMemory<SearchHit> IReadOnlyList<ReadOnlyMemory<SearchHit>>.this[int queryIndex] => AsMemory(queryIndex);

    /// <summary>
    /// The hits of query <paramref name="queryIndex"/>, best first, as a <see cref="ReadOnlyMemory{T}"/> view over the
    /// internal array (no copy), for code that must keep a query's hits beyond a stack frame.
    /// </summary>
    /// <param name="queryIndex">Zero-based position of the query in the batch.</param>
    /// <returns>Between 0 and <see cref="K"/> hits.</returns>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="queryIndex"/> is outside [0, <see cref="QueryCount"/>).</exception>
    public ReadOnlyMemory<SearchHit> AsMemory(int queryIndex)
    {
        CheckQueryIndex(queryIndex);
        return new ReadOnlyMemory<SearchHit>(_hits, queryIndex * K, _counts[queryIndex]);
    }

    /// <summary>Returns an enumerator over the queries' hits, in query order; a struct, so <c>foreach</c> does not allocate.</summary>
    /// <returns>An enumerator positioned before the first query.</returns>
    public Enumerator GetEnumerator() => new(this);

    /// <inheritdoc/>
    IEnumerator<ReadOnlyMemory<SearchHit>> IEnumerable<ReadOnlyMemory<SearchHit>>.GetEnumerator() => GetEnumerator();

    /// <inheritdoc/>
    IEnumerator IEnumerable.GetEnumerator() => GetEnumerator();

    /// <summary>The slots of one query, for the index that fills them.</summary>
    internal Span<SearchHit> Slots(int queryIndex) => new(_hits, queryIndex * K, K);

    /// <summary>Records how many of a query's slots were filled.</summary>
    internal void SetCount(int queryIndex, int count) => _counts[queryIndex] = count;

    /// <summary>The hits of a query without the range check, for loops that already bound the index.</summary>
    internal ReadOnlyMemory<SearchHit> MemoryUnchecked(int queryIndex) => new(_hits, queryIndex * K, _counts[queryIndex]);

    private void CheckQueryIndex(int queryIndex)
    {
        if ((uint)queryIndex >= (uint)QueryCount)
        {
            ThrowHelper.ThrowArgumentOutOfRange(nameof(queryIndex), queryIndex, $"must be in [0, {QueryCount})");
        }
    }

    /// <summary>Enumerates the hits of each query in query order, each as a view over the results' internal array.</summary>
    public struct Enumerator : IEnumerator<ReadOnlyMemory<SearchHit>>
    {
        private readonly BatchSearchResults _results;
        private int _query;

        internal Enumerator(BatchSearchResults results)
        {
            _results = results;
            _query = -1;
        }

        /// <summary>The hits of the current query, best first.</summary>
        /// <remarks>Before the first <see cref="MoveNext"/> or after it returned <see langword="false"/> the value is empty.</remarks>
        public readonly ReadOnlyMemory<SearchHit> Current
            => (uint)_query < (uint)_results.QueryCount ? _results.MemoryUnchecked(_query) : default;

        /// <inheritdoc/>
        readonly object IEnumerator.Current => Current;

        /// <summary>Advances to the next query.</summary>
        /// <returns><see langword="false"/> when every query has been visited.</returns>
        public bool MoveNext()
        {
            if (_query < _results.QueryCount)
            {
                _query++;
            }

            return _query < _results.QueryCount;
        }

        /// <summary>Returns to the position before the first query.</summary>
        public void Reset() => _query = -1;

        /// <summary>Does nothing: the enumerator holds no resources.</summary>
        public readonly void Dispose()
        {
        }
    }
}
