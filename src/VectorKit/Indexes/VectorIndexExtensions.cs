using VectorKit.Internal;

namespace VectorKit.Indexes;

/// <summary>Convenience overloads for <see cref="IVectorIndex"/>.</summary>
/// <remarks>
/// The list overloads take vectors the way embedding code produces them, one array or memory block per row. They
/// check that every row has <see cref="IVectorIndex.Dimension"/> components (naming the first row that does not),
/// copy the rows into one pooled buffer, and call the span-taking member of the index once; the buffer is returned to
/// the pool afterwards. Component checks (finite, non-zero under cosine) are the index's own.
/// </remarks>
public static class VectorIndexExtensions
{
    /// <summary>Finds the <paramref name="k"/> stored vectors nearest to <paramref name="query"/>, best first.</summary>
    /// <param name="index">The index to search.</param>
    /// <param name="query">Exactly <see cref="IVectorIndex.Dimension"/> finite components.</param>
    /// <param name="k">Results wanted; more than the index holds returns everything.</param>
    /// <param name="options">Filter and search width; <see langword="null"/> for defaults.</param>
    /// <returns>A new array of at most <paramref name="k"/> hits.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="index"/> is null.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="k"/> is not positive.</exception>
    /// <exception cref="ArgumentException">The query is invalid (see <see cref="IVectorIndex.Search"/>).</exception>
    public static SearchHit[] Search(this IVectorIndex index, ReadOnlySpan<float> query, int k, SearchOptions? options = null)
    {
        ArgumentNullException.ThrowIfNull(index);
        if (k <= 0)
        {
            ThrowHelper.ThrowArgumentOutOfRange(nameof(k), k, "must be positive");
        }

        if (index is VectorIndex own)
        {
            return own.SearchToArray(query, k, options);
        }

        // Never allocate more than the index could return: k may be int.MaxValue meaning "everything". Count is read
        // before the search takes the index's lock, so items added meanwhile can make a full buffer cut the answer
        // short; the search then runs again with room for them (each answer still comes from one search).
        int size = Math.Max(1, Math.Min(k, index.Count));
        while (true)
        {
            var buffer = new SearchHit[size];
            int written = index.Search(query, buffer, options);
            int count = index.Count;
            if (written < size || size == k || count <= size)
            {
                return written == size ? buffer : buffer.AsSpan(0, written).ToArray();
            }

            size = Math.Min(k, count);
        }
    }

    /// <summary>Finds the <paramref name="k"/> stored vectors nearest to <paramref name="query"/>, best first.</summary>
    /// <param name="index">The index to search.</param>
    /// <param name="query">Exactly <see cref="IVectorIndex.Dimension"/> finite components.</param>
    /// <param name="k">Results wanted; more than the index holds returns everything.</param>
    /// <param name="options">Filter and search width; <see langword="null"/> for defaults.</param>
    /// <returns>A new array of at most <paramref name="k"/> hits.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="index"/> is null.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="k"/> is not positive.</exception>
    /// <exception cref="ArgumentException">The query is invalid (see <see cref="IVectorIndex.Search"/>).</exception>
    public static SearchHit[] Search(this IVectorIndex index, ReadOnlyMemory<float> query, int k, SearchOptions? options = null)
        => Search(index, query.Span, k, options);

    /// <summary>Adds many vectors at once, one memory block per vector; all or nothing.</summary>
    /// <param name="index">The index to add to.</param>
    /// <param name="ids">One id per vector, none already present and no repeats.</param>
    /// <param name="vectors">One block of exactly <see cref="IVectorIndex.Dimension"/> finite components per id.</param>
    /// <exception cref="ArgumentNullException"><paramref name="index"/> or <paramref name="vectors"/> is null.</exception>
    /// <exception cref="ArgumentException">
    /// The counts of <paramref name="ids"/> and <paramref name="vectors"/> differ, a row has the wrong length (the
    /// message names the row), the rows together exceed the largest array, or the index rejects the batch (see
    /// <see cref="IVectorIndex.AddRange"/>).
    /// </exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    public static void AddRange(this IVectorIndex index, ReadOnlySpan<long> ids, IReadOnlyList<ReadOnlyMemory<float>> vectors)
        => AddRows<ReadOnlyMemory<float>, MemoryRow>(index, ids, vectors);

    /// <summary>Adds many vectors at once, one array per vector; all or nothing.</summary>
    /// <param name="index">The index to add to.</param>
    /// <param name="ids">One id per vector, none already present and no repeats.</param>
    /// <param name="vectors">One array of exactly <see cref="IVectorIndex.Dimension"/> finite components per id.</param>
    /// <exception cref="ArgumentNullException"><paramref name="index"/> or <paramref name="vectors"/> is null.</exception>
    /// <exception cref="ArgumentException">
    /// The counts of <paramref name="ids"/> and <paramref name="vectors"/> differ, a row is null or has the wrong length
    /// (the message names the row), the rows together exceed the largest array, or the index rejects the batch (see
    /// <see cref="IVectorIndex.AddRange"/>).
    /// </exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    public static void AddRange(this IVectorIndex index, ReadOnlySpan<long> ids, IReadOnlyList<float[]> vectors)
        => AddRows<float[], ArrayRow>(index, ids, vectors);

    /// <summary>Searches many queries, given one memory block per query; see <see cref="IVectorIndex.SearchBatch"/>.</summary>
    /// <param name="index">The index to search.</param>
    /// <param name="queries">One block of exactly <see cref="IVectorIndex.Dimension"/> finite components per query.</param>
    /// <param name="k">Results wanted per query; more than <see cref="IVectorIndex.Count"/> returns everything.</param>
    /// <param name="options">Filter, width and parallelism; <see langword="null"/> for <see cref="SearchOptions.Default"/>.</param>
    /// <param name="progress">Optional; receives the number of queries completed so far, from worker threads.</param>
    /// <param name="cancellationToken">Stops the batch between blocks of queries.</param>
    /// <returns>The results of every query in list order, each best first.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="index"/> or <paramref name="queries"/> is null.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="k"/> is not positive.</exception>
    /// <exception cref="ArgumentException">
    /// A query has the wrong length (the message names the row), the queries together exceed the largest array, or a
    /// query is invalid for the index.
    /// </exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    public static BatchSearchResults SearchBatch(
        this IVectorIndex index,
        IReadOnlyList<ReadOnlyMemory<float>> queries,
        int k,
        SearchOptions? options = null,
        IProgress<int>? progress = null,
        CancellationToken cancellationToken = default)
        => SearchRows<ReadOnlyMemory<float>, MemoryRow>(index, queries, k, options, progress, cancellationToken);

    /// <summary>Searches many queries, given one array per query; see <see cref="IVectorIndex.SearchBatch"/>.</summary>
    /// <param name="index">The index to search.</param>
    /// <param name="queries">One array of exactly <see cref="IVectorIndex.Dimension"/> finite components per query.</param>
    /// <param name="k">Results wanted per query; more than <see cref="IVectorIndex.Count"/> returns everything.</param>
    /// <param name="options">Filter, width and parallelism; <see langword="null"/> for <see cref="SearchOptions.Default"/>.</param>
    /// <param name="progress">Optional; receives the number of queries completed so far, from worker threads.</param>
    /// <param name="cancellationToken">Stops the batch between blocks of queries.</param>
    /// <returns>The results of every query in list order, each best first.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="index"/> or <paramref name="queries"/> is null.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="k"/> is not positive.</exception>
    /// <exception cref="ArgumentException">
    /// A query is null or has the wrong length (the message names the row), the queries together exceed the largest
    /// array, or a query is invalid for the index.
    /// </exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    public static BatchSearchResults SearchBatch(
        this IVectorIndex index,
        IReadOnlyList<float[]> queries,
        int k,
        SearchOptions? options = null,
        IProgress<int>? progress = null,
        CancellationToken cancellationToken = default)
        => SearchRows<float[], ArrayRow>(index, queries, k, options, progress, cancellationToken);

    private static void CheckK(int k)
    {
        if (k <= 0)
        {
            ThrowHelper.ThrowArgumentOutOfRange(nameof(k), k, "must be positive");
        }
    }

    private static void CheckRowCount(int idCount, int rowCount)
    {
        if (idCount != rowCount)
        {
            ThrowHelper.ThrowArgument("vectors", $"vectors has {rowCount} rows; ids has {idCount}. Pass one vector per id.");
        }
    }

    // Both list shapes share one copy loop; the row accessor is a struct so the loop has no delegate or interface call per row.
    private static void AddRows<TRow, TAccess>(IVectorIndex index, ReadOnlySpan<long> ids, IReadOnlyList<TRow> vectors)
        where TAccess : struct, IRowAccess<TRow>
    {
        ArgumentNullException.ThrowIfNull(index);
        ArgumentNullException.ThrowIfNull(vectors);
        CheckRowCount(ids.Length, vectors.Count);
        using ScratchRental<float> flat = Flatten<TRow, TAccess>(vectors, index.Dimension, nameof(vectors));
        index.AddRange(ids, flat.Span);
    }

    private static BatchSearchResults SearchRows<TRow, TAccess>(IVectorIndex index, IReadOnlyList<TRow> queries, int k, SearchOptions? options, IProgress<int>? progress, CancellationToken cancellationToken)
        where TAccess : struct, IRowAccess<TRow>
    {
        ArgumentNullException.ThrowIfNull(index);
        ArgumentNullException.ThrowIfNull(queries);
        CheckK(k);
        using ScratchRental<float> flat = Flatten<TRow, TAccess>(queries, index.Dimension, nameof(queries));
        return index.SearchBatch(flat.Span, k, options, progress, cancellationToken);
    }

    private static ScratchRental<float> Flatten<TRow, TAccess>(IReadOnlyList<TRow> rows, int dimension, string paramName)
        where TAccess : struct, IRowAccess<TRow>
    {
        int count = rows.Count;
        long total = (long)count * dimension;
        if (total > Array.MaxLength)
        {
            ThrowHelper.ThrowArgument(paramName, $"{paramName} has {count} rows of dimension {dimension}, {total} components in all; one batch holds at most {Array.MaxLength}. Split it.");
        }

        ScratchRental<float> flat = ScratchRental<float>.Rent((int)total);

        // One pass that reads each row once: checking first and copying later would read the list twice, and a list
        // changed in between could leave stale pooled values in the buffer.
        try
        {
            for (int r = 0; r < count; r++)
            {
                TRow row = rows[r];
                if (!TAccess.HasValue(row))
                {
                    ThrowHelper.ThrowArgument(paramName, $"{paramName}[{r}] is null; every row needs {dimension} components.");
                }

                ReadOnlySpan<float> values = TAccess.Span(row);
                if (values.Length != dimension)
                {
                    ThrowHelper.ThrowArgument(paramName, $"{paramName}[{r}] has {values.Length} components; the index dimension is {dimension}.");
                }

                values.CopyTo(flat.Span.Slice(r * dimension, dimension));
            }
        }
        catch
        {
            flat.Dispose();
            throw;
        }

        return flat;
    }

    private interface IRowAccess<TRow>
    {
        static abstract bool HasValue(TRow row);

        static abstract ReadOnlySpan<float> Span(TRow row);
    }

    private readonly struct MemoryRow : IRowAccess<ReadOnlyMemory<float>>
    {
        public static bool HasValue(ReadOnlyMemory<float> row) => true;

        public static ReadOnlySpan<float> Span(ReadOnlyMemory<float> row) => row.Span;
    }

    private readonly struct ArrayRow : IRowAccess<float[]>
    {
        public static bool HasValue(float[] row) => row is not null;

        public static ReadOnlySpan<float> Span(float[] row) => row;
    }
}
