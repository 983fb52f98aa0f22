using System.Diagnostics;
using VectorKit.Indexes;

namespace VectorKit.Evaluation;

/// <summary>Measures any <see cref="IVectorIndex"/>: build time, search throughput, memory and recall against ground truth.</summary>
public static class SearchQuality
{
    /// <summary>
    /// Builds <paramref name="index"/> from a data set, searches a query set in one batch, and compares the results
    /// with <paramref name="groundTruth"/>. Build and search are timed separately with a <see cref="Stopwatch"/>.
    /// </summary>
    /// <remarks>
    /// The build adds the data set in batches of <see cref="QualityMeasurementOptions.BuildBatchSize"/>; the search is a
    /// single <see cref="IVectorIndex.SearchBatch"/> call, so throughput includes its parallelism. The index is left
    /// built and is not disposed. Times are wall-clock: on a busy machine they vary from run to run. Nothing is warmed
    /// up first, so in a fresh process the times include JIT compilation; for steady-state figures, measure a small
    /// data set once before the real one.
    /// </remarks>
    /// <param name="index">An empty index of the data set's dimension.</param>
    /// <param name="ids">One distinct id per data set row; empty (or <see langword="null"/>) for the row numbers 0..n−1. Must match the ids <paramref name="groundTruth"/> was computed with.</param>
    /// <param name="baseVectors">The data set, row after row: a multiple of <c>index.Dimension</c> components.</param>
    /// <param name="queries">The queries, row after row, in the order of <paramref name="groundTruth"/>'s rows.</param>
    /// <param name="groundTruth">The true neighbours of each query (from <see cref="GroundTruth"/>), with at least <c>min(k, n)</c> slots per row.</param>
    /// <param name="options">k, search options and build batch size; <see langword="null"/> for <see cref="QualityMeasurementOptions.Default"/>.</param>
    /// <param name="progress">Optional; receives the stage and the work done, between build batches and from the search's worker threads.</param>
    /// <param name="cancellationToken">Stops the build between batches and the search between blocks of queries.</param>
    /// <returns>The measured report.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="index"/> or <paramref name="groundTruth"/> is null.</exception>
    /// <exception cref="ArgumentException">The index is not empty; a buffer is not a multiple of the dimension; <paramref name="ids"/> has the wrong length; the ground truth covers a different number of queries or holds fewer than <c>min(k, n)</c> neighbours per query; or the index rejects a vector or query.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    public static SearchQualityReport Measure(
        IVectorIndex index,
        ReadOnlySpan<long> ids,
        ReadOnlySpan<float> baseVectors,
        ReadOnlySpan<float> queries,
        NeighborTable groundTruth,
        QualityMeasurementOptions? options = null,
        IProgress<EvaluationProgress>? progress = null,
        CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(index);
        ArgumentNullException.ThrowIfNull(groundTruth);
        options ??= QualityMeasurementOptions.Default;
        int d = index.Dimension;
        int k = options.K;
        if (index.Count != 0)
        {
            ThrowHelper.ThrowArgument(nameof(index), $"index already holds {index.Count} vectors; it must be empty so the build can be timed.");
        }

        if (baseVectors.Length % d != 0)
        {
            ThrowHelper.ThrowArgument(nameof(baseVectors), $"baseVectors has {baseVectors.Length} components, not a multiple of the index dimension {d}.");
        }

        if (queries.Length % d != 0)
        {
            ThrowHelper.ThrowArgument(nameof(queries), $"queries has {queries.Length} components, not a multiple of the index dimension {d}.");
        }

        int n = baseVectors.Length / d;
        int queryCount = queries.Length / d;
        if (!ids.IsEmpty && ids.Length != n)
        {
            ThrowHelper.ThrowArgument(nameof(ids), $"ids has {ids.Length} elements; baseVectors holds {n} rows of dimension {d}. Pass one id per row, or none for 0..n-1.");
        }

        if (groundTruth.QueryCount != queryCount)
        {
            ThrowHelper.ThrowArgument(nameof(groundTruth), $"groundTruth has {groundTruth.QueryCount} queries; queries holds {queryCount}.");
        }

        if (queryCount == 0)
        {
            ThrowHelper.ThrowArgument(nameof(queries), "queries is empty; throughput and recall need at least one query.");
        }

        // A truth computed for fewer neighbours than k would make every recall look perfect past its width.
        if (groundTruth.K < Math.Min(k, n))
        {
            ThrowHelper.ThrowArgument(nameof(groundTruth), $"groundTruth holds {groundTruth.K} neighbours per query; recall@{k} over {n} vectors needs {Math.Min(k, n)}.");
        }

        if (ids.IsEmpty && n > 0)
        {
            ids = RowNumbers.Upto(n);
        }

        int batch = options.BuildBatchSize;
        progress?.Report(new EvaluationProgress(EvaluationStage.Build, 0, n));
        var buildClock = Stopwatch.StartNew();
        for (int start = 0; start < n; start += batch)
        {
            cancellationToken.ThrowIfCancellationRequested();
            int rows = Math.Min(batch, n - start);
            index.AddRange(ids.Slice(start, rows), baseVectors.Slice(start * d, rows * d));
            progress?.Report(new EvaluationProgress(EvaluationStage.Build, start + rows, n));
        }

        buildClock.Stop();
        int vectorCount = index.Count;
        double bytesPerVector = vectorCount == 0 ? 0 : (double)index.MemoryBytes / vectorCount;

        SearchOptions search = options.Search ?? SearchOptions.Default;
        IProgress<int>? searchProgress = progress is null
            ? null
            : new ForwardProgress(progress, queryCount);
        var searchClock = Stopwatch.StartNew();
        BatchSearchResults results = index.SearchBatch(queries, k, search, searchProgress, cancellationToken);
        searchClock.Stop();

        double recall = Recall.AtK(groundTruth, results, k);
        double seconds = searchClock.Elapsed.TotalSeconds;
        double queriesPerSecond = seconds > 0 ? queryCount / seconds : double.PositiveInfinity;
        return new SearchQualityReport(
            recall,
            queriesPerSecond,
            buildClock.Elapsed,
            searchClock.Elapsed,
            bytesPerVector,
            k,
            queryCount,
            vectorCount,
            search.EffectiveParallelism);
    }

    // Reports search progress synchronously on the worker thread (Progress<T> would post to a context and reorder).
    private sealed class ForwardProgress(IProgress<EvaluationProgress> target, int total) : IProgress<int>
    {
        public void Report(int value) => target.Report(new EvaluationProgress(EvaluationStage.Search, value, total));
    }
}
