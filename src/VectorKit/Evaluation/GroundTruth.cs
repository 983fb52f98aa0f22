using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Internal;

namespace VectorKit.Evaluation;

/// <summary>The true k nearest neighbours of a query set, found by exhaustive search, to measure approximate indexes against.</summary>
/// <remarks>
/// Neighbours are ordered as every index orders them: ascending distance under the metric, ties broken by ascending id.
/// Distances are those of <see cref="ExactIndex"/> (float32 SIMD kernels, squared differences summed directly), so two candidates whose distances differ by less than float rounding may rank in either order; that is at
/// the edge of what any float index can resolve.
/// </remarks>
public static class GroundTruth
{
    /// <summary>Computes the exact k nearest neighbours of each query within a data set.</summary>
    /// <param name="baseVectors">The data set, row after row: <c>n × dimension</c> finite components (none zero under cosine).</param>
    /// <param name="ids">One distinct id per data set row; empty (or <see langword="null"/>) for the row numbers 0..n−1.</param>
    /// <param name="queries">The queries, row after row: a multiple of <paramref name="dimension"/> components.</param>
    /// <param name="dimension">Components per vector, at least 1.</param>
    /// <param name="k">Neighbours wanted per query, at least 1; more than n gives all n.</param>
    /// <param name="metric">The distance metric.</param>
    /// <param name="progress">Optional; receives the number of queries completed so far, from worker threads.</param>
    /// <param name="cancellationToken">Stops the search between blocks of queries.</param>
    /// <returns>One row per query of <c>min(k, n)</c> ids, best first.</returns>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="dimension"/> or <paramref name="k"/> is not positive, or <paramref name="metric"/> is not defined.</exception>
    /// <exception cref="ArgumentException">A buffer is not a multiple of <paramref name="dimension"/>, <paramref name="ids"/> has the wrong length or a repeated id, or a vector is invalid for the metric.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    public static NeighborTable Compute(
        ReadOnlySpan<float> baseVectors,
        ReadOnlySpan<long> ids,
        ReadOnlySpan<float> queries,
        int dimension,
        int k,
        DistanceMetric metric,
        IProgress<int>? progress = null,
        CancellationToken cancellationToken = default)
    {
        if (dimension <= 0)
        {
            ThrowHelper.ThrowArgumentOutOfRange(nameof(dimension), dimension, "must be positive");
        }

        if (k <= 0)
        {
            ThrowHelper.ThrowArgumentOutOfRange(nameof(k), k, "must be positive");
        }

        VectorChecks.CheckMetric(metric);
        if (baseVectors.Length % dimension != 0)
        {
            ThrowHelper.ThrowArgument(nameof(baseVectors), $"baseVectors has {baseVectors.Length} components, not a multiple of the dimension {dimension}.");
        }

        if (queries.Length % dimension != 0)
        {
            ThrowHelper.ThrowArgument(nameof(queries), $"queries has {queries.Length} components, not a multiple of the dimension {dimension}.");
        }

        int n = baseVectors.Length / dimension;
        if (!ids.IsEmpty && ids.Length != n)
        {
            ThrowHelper.ThrowArgument(nameof(ids), $"ids has {ids.Length} elements; baseVectors holds {n} rows of dimension {dimension}. Pass one id per row, or none for 0..n-1.");
        }

        if (ids.IsEmpty && n > 0)
        {
            ids = RowNumbers.Upto(n);
        }

        using var index = new ExactIndex(dimension, metric, new ExactIndexOptions { InitialCapacity = n });
        index.AddRange(ids, baseVectors);
        return Compute(index, queries, k, progress, cancellationToken);
    }

    /// <summary>Reads the k nearest neighbours of each query from an index that is already built.</summary>
    /// <remarks>This is ground truth only when <paramref name="index"/> is exact (an <see cref="ExactIndex"/>); from an approximate index it gives that index's own results.</remarks>
    /// <param name="index">The index to search, normally an <see cref="ExactIndex"/>.</param>
    /// <param name="queries">The queries, row after row: a multiple of <see cref="IVectorIndex.Dimension"/> components.</param>
    /// <param name="k">Neighbours wanted per query, at least 1.</param>
    /// <param name="progress">Optional; receives the number of queries completed so far, from worker threads.</param>
    /// <param name="cancellationToken">Stops the search between blocks of queries.</param>
    /// <returns>One row per query of <c>min(k, index.Count)</c> ids, best first.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="index"/> is null.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="k"/> is not positive.</exception>
    /// <exception cref="ArgumentException">The query buffer is not a multiple of the dimension, or a query is invalid.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    public static NeighborTable Compute(
        IVectorIndex index,
        ReadOnlySpan<float> queries,
        int k,
        IProgress<int>? progress = null,
        CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(index);
        if (k <= 0)
        {
            ThrowHelper.ThrowArgumentOutOfRange(nameof(k), k, "must be positive");
        }

        return NeighborTable.FromResults(index.SearchBatch(queries, k, SearchOptions.Default, progress, cancellationToken));
    }
}
