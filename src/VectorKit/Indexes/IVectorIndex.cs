using VectorKit.Distance;

namespace VectorKit.Indexes;

/// <summary>
/// A collection of fixed-dimension float vectors, each under a caller-supplied 64-bit id, that answers
/// k-nearest-neighbour queries. Every index kind (exact, graph, inverted-file) implements it.
/// </summary>
/// <remarks>
/// <para><b>Result convention.</b> Results are <see cref="SearchHit"/> values, best first: ascending distance as
/// defined by <see cref="DistanceMetric"/> (smaller is better for every metric), ties broken by ascending id.</para>
/// <para><b>Cosine.</b> Under <see cref="DistanceMetric.Cosine"/> vectors are normalised to unit length once, when
/// they are added; the query is normalised once per search. Zero vectors are rejected.</para>
/// <para><b>Input checks.</b> Every vector must have exactly <see cref="Dimension"/> finite components. A failed
/// add or remove leaves the index unchanged, even for a batch: it is validated whole before anything is written.</para>
/// <para><b>Thread safety.</b> Implementations document their own guarantees; the built-in ones allow any number of
/// concurrent searches, and serialize writes against searches: a search sees each write entirely or not at all, except
/// where a kind documents a step it runs beside searches (the graph links a batch of new items while searches run).</para>
/// <para><b>Disposal.</b> After <see cref="IDisposable.Dispose"/> every member but <see cref="Dimension"/>,
/// <see cref="Metric"/>, <see cref="Options"/>, <see cref="CodeBytesPerVector"/> (fixed by the options) and <c>Dispose</c>
/// itself throws <see cref="ObjectDisposedException"/>.</para>
/// </remarks>
public interface IVectorIndex : IDisposable
{
    /// <summary>The number of components of every vector in the index.</summary>
    int Dimension { get; }

    /// <summary>The metric distances are computed with.</summary>
    DistanceMetric Metric { get; }

    /// <summary>The options the index was built with (or loaded with).</summary>
    VectorIndexOptions Options { get; }

    /// <summary>The number of vectors currently in the index (removed ones excluded).</summary>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    int Count { get; }

    /// <summary>Bytes the index holds for vectors, ids and search structures (an estimate within a few percent).</summary>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    long MemoryBytes { get; }

    /// <summary>
    /// Bytes a search reads per stored vector: <c>4 × dimension</c> for float32, the code length for compressed
    /// encodings. Full vectors kept for re-scoring are not counted (a search reads them only for re-scored candidates);
    /// <see cref="MemoryBytes"/> counts them.
    /// </summary>
    int CodeBytesPerVector { get; }

    /// <summary>Whether a vector with this id is in the index.</summary>
    /// <param name="id">The id to look up.</param>
    /// <returns><see langword="true"/> when the id is present.</returns>
    bool Contains(long id);

    /// <summary>Copies the stored vector of an id (unit-normalised under cosine).</summary>
    /// <param name="id">The id to look up.</param>
    /// <param name="destination">Receives <see cref="Dimension"/> components.</param>
    /// <returns><see langword="false"/> when the id is not in the index; <paramref name="destination"/> is then untouched.</returns>
    /// <exception cref="ArgumentException"><paramref name="destination"/> is shorter than <see cref="Dimension"/>.</exception>
    bool TryGetVector(long id, Span<float> destination);

    /// <summary>A snapshot of the ids currently in the index, in ascending order.</summary>
    /// <returns>A new array of <see cref="Count"/> ids, taken at one moment: a concurrent add or remove is either in it entirely or not at all.</returns>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    long[] GetIds();

    /// <summary>Adds one vector.</summary>
    /// <param name="id">A caller-chosen id not already in the index.</param>
    /// <param name="vector">Exactly <see cref="Dimension"/> finite components.</param>
    /// <exception cref="ArgumentException">Wrong length, a NaN or infinite component, a zero vector under cosine, or a duplicate id.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    void Add(long id, ReadOnlySpan<float> vector);

    /// <summary>Adds many vectors at once; all or nothing.</summary>
    /// <param name="ids">One id per vector, none already present and no repeats.</param>
    /// <param name="vectors">The vectors, row after row: <c>ids.Length × Dimension</c> components.</param>
    /// <param name="progress">Optional; receives the number of vectors added so far (from worker threads where the kind adds in parallel).</param>
    /// <param name="cancellationToken">
    /// Stops the batch. A cancelled batch leaves the index as it was: nothing of the batch stays in it (a concurrent
    /// search may have seen some of its items while it ran). A token cancelled before the call adds nothing.
    /// </param>
    /// <exception cref="ArgumentException">Lengths disagree, a component is not finite, a zero vector under cosine, or an id repeats or exists.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled; nothing was added.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    void AddRange(ReadOnlySpan<long> ids, ReadOnlySpan<float> vectors, IProgress<int>? progress = null, CancellationToken cancellationToken = default);

    /// <summary>Adds a vector, or replaces the vector of an id already present, as one atomic change.</summary>
    /// <param name="id">Any id.</param>
    /// <param name="vector">Exactly <see cref="Dimension"/> finite components.</param>
    /// <returns><see langword="true"/> when the id was present and its vector replaced; <see langword="false"/> when it was added.</returns>
    /// <remarks>A concurrent search sees the item with its old vector or with its new one, never without it.</remarks>
    /// <exception cref="ArgumentException">Wrong length, a NaN or infinite component, or a zero vector under cosine.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    bool AddOrReplace(long id, ReadOnlySpan<float> vector);

    /// <summary>Adds or replaces many vectors as one atomic change: all or nothing.</summary>
    /// <param name="ids">One id per vector, no repeats; ids present have their vectors replaced, the others are added.</param>
    /// <param name="vectors">The vectors, row after row: <c>ids.Length × Dimension</c> components.</param>
    /// <param name="progress">Optional; receives the number of vectors written so far.</param>
    /// <param name="cancellationToken">Stops the batch; a cancelled batch leaves the index as it was.</param>
    /// <returns>How many of the ids were present and had their vectors replaced.</returns>
    /// <remarks>A concurrent search sees the index entirely before or entirely after the batch.</remarks>
    /// <exception cref="ArgumentException">Lengths disagree, a component is not finite, a zero vector under cosine, or an id repeats.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled; nothing changed.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    int AddOrReplaceRange(ReadOnlySpan<long> ids, ReadOnlySpan<float> vectors, IProgress<int>? progress = null, CancellationToken cancellationToken = default);

    /// <summary>Removes the vector with this id.</summary>
    /// <param name="id">An id in the index.</param>
    /// <exception cref="KeyNotFoundException">The id is not in the index.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    void Remove(long id);

    /// <summary>Removes many vectors at once; all or nothing.</summary>
    /// <param name="ids">Ids in the index, no repeats.</param>
    /// <exception cref="ArgumentException">An id appears more than once; nothing was removed.</exception>
    /// <exception cref="KeyNotFoundException">An id is not in the index; nothing was removed.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    void RemoveRange(ReadOnlySpan<long> ids);

    /// <summary>Releases the space held by removed vectors and by growth slack, rebuilding search structures where the kind needs it.</summary>
    /// <param name="progress">Optional; receives the number of items processed so far, where the kind rebuilds.</param>
    /// <param name="cancellationToken">Abandons the compaction; the index is then as it was.</param>
    /// <exception cref="OperationCanceledException">The token was cancelled; nothing changed.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    void Compact(IProgress<int>? progress = null, CancellationToken cancellationToken = default);

    /// <summary>Finds the stored vectors nearest to <paramref name="query"/> and writes them, best first, into <paramref name="destination"/>.</summary>
    /// <param name="query">Exactly <see cref="Dimension"/> finite components.</param>
    /// <param name="destination">Its length is k, the number of results wanted.</param>
    /// <param name="options">Filter and search width; <see langword="null"/> for <see cref="SearchOptions.Default"/>.</param>
    /// <returns>How many results were written: <c>min(k, number of items passing the filter)</c> for an exact index.</returns>
    /// <exception cref="ArgumentException">The query has the wrong length, a non-finite component, or is zero under cosine; or <paramref name="destination"/> is empty.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    int Search(ReadOnlySpan<float> query, Span<SearchHit> destination, SearchOptions? options = null);

    /// <summary>Searches many queries, in parallel over the cores allowed by <see cref="SearchOptions.MaxDegreeOfParallelism"/>.</summary>
    /// <param name="queries">The queries, row after row: a multiple of <see cref="Dimension"/> components.</param>
    /// <param name="k">Results wanted per query; more than <see cref="Count"/> returns everything (slots are reserved for at most <see cref="Count"/>).</param>
    /// <param name="options">Filter, width and parallelism; <see langword="null"/> for <see cref="SearchOptions.Default"/>.</param>
    /// <param name="progress">Optional; receives the number of queries completed so far, from worker threads.</param>
    /// <param name="cancellationToken">Stops the batch between blocks of queries.</param>
    /// <returns>The results of every query, each best first, exactly as <see cref="Search"/> would return them.</returns>
    /// <exception cref="ArgumentException">The query buffer is not a multiple of <see cref="Dimension"/>, or a query is invalid.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="k"/> is not positive.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    BatchSearchResults SearchBatch(
        ReadOnlySpan<float> queries,
        int k,
        SearchOptions? options = null,
        IProgress<int>? progress = null,
        CancellationToken cancellationToken = default);
}
