using System.Buffers;
using VectorKit.Indexes;

namespace VectorKit.Evaluation;

/// <summary>recall@k: the share of the true k nearest neighbours that a search found.</summary>
/// <remarks>
/// <para><b>Definition.</b> For one query with true neighbours <c>T</c> (best first) and found ids <c>F</c> (best first),
/// let <c>Tₖ</c> be the first <c>min(k, |T|)</c> ids of <c>T</c> and <c>Fₖ</c> the first <c>min(k, |F|)</c> ids of
/// <c>F</c>. Then <c>recall = |set(Fₖ) ∩ set(Tₖ)| / |Tₖ|</c>, and 1 when <c>Tₖ</c> is empty (nothing could be missed).
/// recall@k of a query set is the arithmetic mean over its queries. The value is in [0, 1].</para>
/// <para><b>Ties.</b> This is the plain id-set definition: when several items share the k-th true distance, only those
/// the ground truth kept (the smallest ids, by the library's tie rule) count as true neighbours, so a search that
/// returns an equally distant item with a larger id scores it as a miss. Distances are not consulted.</para>
/// <para><b>Duplicates.</b> A repeated id in the found ids counts once, so it can never raise recall; a repeated id among
/// the first k true ids is an error, since the ground truth would then be ill-formed.</para>
/// </remarks>
public static class Recall
{
    // Rows up to this many ids (true plus found) are sorted on the stack; longer ones rent a buffer.
    private const int StackLimit = 256;

    /// <summary>recall@k of one query (see the type remarks for the definition).</summary>
    /// <param name="trueIds">The true neighbour ids, best first.</param>
    /// <param name="foundIds">The ids a search returned, best first.</param>
    /// <param name="k">The cut-off, at least 1.</param>
    /// <returns><c>|set(Fₖ) ∩ set(Tₖ)| / |Tₖ|</c>, or 1 when <paramref name="trueIds"/> is empty.</returns>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="k"/> is not positive.</exception>
    /// <exception cref="ArgumentException">An id appears twice among the first <paramref name="k"/> of <paramref name="trueIds"/>.</exception>
    public static double ForQuery(ReadOnlySpan<long> trueIds, ReadOnlySpan<long> foundIds, int k)
    {
        CheckK(k);
        return Score(trueIds, foundIds, k, nameof(trueIds), -1);
    }

    /// <summary>Mean recall@k of a table of results against a ground-truth table.</summary>
    /// <param name="truth">The true neighbours, one row per query (from <see cref="GroundTruth"/>).</param>
    /// <param name="results">The ids found, one row per query in the same order.</param>
    /// <param name="k">The cut-off, at least 1.</param>
    /// <returns>The mean over queries of the per-query recall, in [0, 1].</returns>
    /// <exception cref="ArgumentNullException">A table is null.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="k"/> is not positive.</exception>
    /// <exception cref="ArgumentException">The query counts differ or are zero, or a truth row repeats an id among its first k.</exception>
    public static double AtK(NeighborTable truth, NeighborTable results, int k)
    {
        ArgumentNullException.ThrowIfNull(truth);
        ArgumentNullException.ThrowIfNull(results);
        CheckK(k);
        CheckCounts(truth.QueryCount, results.QueryCount);
        double sum = 0;
        for (int q = 0; q < truth.QueryCount; q++)
        {
            sum += Score(truth[q], results[q], k, nameof(truth), q);
        }

        return sum / truth.QueryCount;
    }

    /// <summary>Mean recall@k of a batch search against a ground-truth table.</summary>
    /// <param name="truth">The true neighbours, one row per query (from <see cref="GroundTruth"/>).</param>
    /// <param name="results">The results of <see cref="IVectorIndex.SearchBatch"/> for the same queries in the same order.</param>
    /// <param name="k">The cut-off, at least 1.</param>
    /// <returns>The mean over queries of the per-query recall, in [0, 1].</returns>
    /// <exception cref="ArgumentNullException">An argument is null.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="k"/> is not positive.</exception>
    /// <exception cref="ArgumentException">The query counts differ or are zero, or a truth row repeats an id among its first k.</exception>
    public static double AtK(NeighborTable truth, BatchSearchResults results, int k)
    {
        ArgumentNullException.ThrowIfNull(results);
        return AtK(truth, NeighborTable.FromResults(results), k);
    }

    /// <summary>Mean recall@k of plain id arrays, one per query, best first.</summary>
    /// <param name="truth">The true neighbour ids of each query.</param>
    /// <param name="results">The ids found for each query, in the same order.</param>
    /// <param name="k">The cut-off, at least 1.</param>
    /// <returns>The mean over queries of the per-query recall, in [0, 1].</returns>
    /// <exception cref="ArgumentNullException">A list is null.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="k"/> is not positive.</exception>
    /// <exception cref="ArgumentException">A row is null, the query counts differ or are zero, or a truth row repeats an id among its first k.</exception>
    public static double AtK(IReadOnlyList<long[]> truth, IReadOnlyList<long[]> results, int k)
    {
        ArgumentNullException.ThrowIfNull(truth);
        ArgumentNullException.ThrowIfNull(results);
        return AtK(NeighborTable.FromRows(truth), NeighborTable.FromRows(results), k);
    }

    private static void CheckK(int k)
    {
        if (k <= 0)
        {
            ThrowHelper.ThrowArgumentOutOfRange(nameof(k), k, "must be positive");
        }
    }

    private static void CheckCounts(int truthQueries, int resultQueries)
    {
        if (truthQueries != resultQueries)
        {
            ThrowHelper.ThrowArgument("results", $"results has {resultQueries} queries; truth has {truthQueries}. Both must cover the same queries in the same order.");
        }

        if (truthQueries == 0)
        {
            ThrowHelper.ThrowArgument("truth", "truth has no queries; recall is a mean over queries and needs at least one.");
        }
    }

    // Sorts copies of both prefixes and counts the distinct ids they share in one merge: O(k log k), no hashing.
    private static double Score(ReadOnlySpan<long> trueIds, ReadOnlySpan<long> foundIds, int k, string paramName, int query)
    {
        int t = Math.Min(k, trueIds.Length);
        if (t == 0)
        {
            return 1.0;
        }

        int f = Math.Min(k, foundIds.Length);
        long[]? rented = null;
        Span<long> scratch = t + f <= StackLimit
            ? stackalloc long[StackLimit]
            : (rented = ArrayPool<long>.Shared.Rent(t + f));
        try
        {
            Span<long> truth = scratch[..t];
            Span<long> found = scratch.Slice(t, f);
            trueIds[..t].CopyTo(truth);
            foundIds[..f].CopyTo(found);
            truth.Sort();
            found.Sort();
            for (int i = 1; i < t; i++)
            {
                if (truth[i] == truth[i - 1])
                {
                    string where = query >= 0 ? $"{paramName} row {query}" : paramName;
                    ThrowHelper.ThrowArgument(paramName, $"{where} lists id {truth[i]} more than once among its first {t}; true neighbour ids must be distinct.");
                }
            }

            int shared = 0;
            int a = 0;
            int b = 0;
            while (a < t && b < f)
            {
                if (truth[a] < found[b])
                {
                    a++;
                }
                else if (truth[a] > found[b])
                {
                    b++;
                }
                else
                {
                    shared++;
                    a++;

                    // Skip repeats of the matched id so a duplicated result counts once.
                    long matched = found[b];
                    while (b < f && found[b] == matched)
                    {
                        b++;
                    }
                }
            }

            return (double)shared / t;
        }
        finally
        {
            if (rented is not null)
            {
                ArrayPool<long>.Shared.Return(rented);
            }
        }
    }
}
