using VectorKit.Indexes;

namespace VectorKit.Evaluation;

/// <summary>
/// The neighbour ids of a set of queries, best first: the ground truth of an evaluation, or the ids an index returned.
/// </summary>
/// <remarks>
/// Stored flat, <see cref="K"/> slots per query plus one count per query, so a table for 10⁶ queries is two arrays.
/// A row may hold fewer than <see cref="K"/> ids (a data set smaller than k, or a filter). Instances are immutable.
/// </remarks>
public sealed class NeighborTable
{
    private readonly long[] _ids;
    private readonly int[] _counts;

    // ids holds counts.Length rows of k slots; row i's first counts[i] slots are used.
    internal NeighborTable(long[] ids, int[] counts, int k)
    {
        _ids = ids;
        _counts = counts;
        K = k;
    }

    /// <summary>The number of queries (rows).</summary>
    public int QueryCount => _counts.Length;

    /// <summary>The slots per row: the most ids any row can hold (the k asked for, capped at the data set size).</summary>
    public int K { get; }

    /// <summary>The neighbour ids of query <paramref name="queryIndex"/>, best first; may be fewer than <see cref="K"/>.</summary>
    /// <param name="queryIndex">Zero-based position of the query.</param>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="queryIndex"/> is outside [0, <see cref="QueryCount"/>).</exception>
    public ReadOnlySpan<long> this[int queryIndex]
    {
        get
        {
            if ((uint)queryIndex >= (uint)QueryCount)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(queryIndex), queryIndex, $"must be in [0, {QueryCount})");
            }

            return new ReadOnlySpan<long>(_ids, queryIndex * K, _counts[queryIndex]);
        }
    }

    /// <summary>Copies the ids out of a batch search's results, keeping their order.</summary>
    /// <param name="results">The results of <see cref="IVectorIndex.SearchBatch"/>.</param>
    /// <returns>A table with one row per query and <see cref="BatchSearchResults.K"/> slots per row.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="results"/> is null.</exception>
    public static NeighborTable FromResults(BatchSearchResults results)
    {
        ArgumentNullException.ThrowIfNull(results);
        int k = results.K;
        var ids = new long[checked(results.QueryCount * k)];
        var counts = new int[results.QueryCount];
        for (int q = 0; q < counts.Length; q++)
        {
            ReadOnlySpan<SearchHit> hits = results[q];
            Span<long> row = ids.AsSpan(q * k, hits.Length);
            for (int j = 0; j < hits.Length; j++)
            {
                row[j] = hits[j].Id;
            }

            counts[q] = hits.Length;
        }

        return new NeighborTable(ids, counts, k);
    }

    /// <summary>Copies one array of ids per query, best first (for results produced outside VectorKit).</summary>
    /// <param name="rows">One array per query; rows may differ in length.</param>
    /// <returns>A table whose <see cref="K"/> is the longest row's length.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="rows"/> is null.</exception>
    /// <exception cref="ArgumentException">A row is null.</exception>
    public static NeighborTable FromRows(IReadOnlyList<long[]> rows)
    {
        ArgumentNullException.ThrowIfNull(rows);
        int k = 0;
        for (int q = 0; q < rows.Count; q++)
        {
            long[]? row = rows[q];
            if (row is null)
            {
                ThrowHelper.ThrowArgument(nameof(rows), $"rows[{q}] is null; every query needs an array of ids (empty when it has none).");
            }

            k = Math.Max(k, row.Length);
        }

        var ids = new long[checked(rows.Count * k)];
        var counts = new int[rows.Count];
        for (int q = 0; q < rows.Count; q++)
        {
            rows[q].CopyTo(ids.AsSpan(q * k));
            counts[q] = rows[q].Length;
        }

        return new NeighborTable(ids, counts, k);
    }
}
