using System.Collections.Concurrent;
using System.Diagnostics;
using System.Globalization;
using System.Runtime.ExceptionServices;
using VectorKit.Distance;
using VectorKit.Indexes;

namespace VectorKit.Reranking;

/// <summary>
/// Answers a query in stages: retrieve <see cref="RerankingOptions.RetrievalDepth"/> candidates from any
/// <see cref="IVectorIndex"/> by the query's retrieval vector; optionally re-score them on full vectors and keep the
/// <see cref="RerankingOptions.ExactRescoringDepth"/> nearest; score those with the caller's
/// <see cref="PairwiseScorer{TQuery}"/> and return the <see cref="RerankingOptions.FinalCount"/> highest scores.
/// </summary>
/// <typeparam name="TQuery">The caller's query type.</typeparam>
/// <remarks>
/// <para><b>What pruning costs.</b> An item the scorer would rank in its top k is returned only if every stage kept
/// it; <see cref="RerankingCalibration.Calibrate"/> measures that loss per stage and picks the depths.</para>
/// <para><b>Errors.</b> Anything a stage throws (the scorer, the retrieval vector, the index), a non-finite score
/// and a wrong number of scores surface as a <see cref="RerankingException"/> naming the query and the stage. In a
/// batch, the failing query with the lowest index is reported; a cancelled batch throws
/// <see cref="OperationCanceledException"/>.</para>
/// <para><b>Thread safety.</b> All members are thread-safe: queries may run concurrently (each uses its own pooled
/// scratch buffers). The scorer and the filter are called from several threads at once.</para>
/// </remarks>
public sealed class RerankingPipeline<TQuery>
{
    private readonly IVectorIndex _index;
    private readonly PairwiseScorer<TQuery> _scorer;
    private readonly RerankingOptions _options;
    private readonly IFullVectorSource? _fullVectors;
    private readonly SearchOptions _searchOptions;
    private readonly ConcurrentBag<RerankingWorkspace> _workspaces = new();

    /// <summary>Builds a pipeline over an index and a scorer.</summary>
    /// <param name="index">The index candidates are retrieved from; any kind.</param>
    /// <param name="scorer">The caller's pairwise scorer.</param>
    /// <param name="options">Depths and width; <see langword="null"/> for <see cref="RerankingOptions.Default"/>.</param>
    /// <param name="fullVectors">
    /// Full vectors for the exact stage; <see langword="null"/> reads them from the index with
    /// <see cref="IVectorIndex.TryGetVector"/>. Ignored without <see cref="RerankingOptions.ExactRescoringDepth"/>.
    /// </param>
    /// <exception cref="ArgumentNullException"><paramref name="index"/> or <paramref name="scorer"/> is null.</exception>
    /// <exception cref="ArgumentException">The depths are inconsistent (a depth below <see cref="RerankingOptions.FinalCount"/>, or an exact depth above the retrieval depth), or the full-vector source's dimension differs from the index's.</exception>
    public RerankingPipeline(IVectorIndex index, PairwiseScorer<TQuery> scorer, RerankingOptions? options = null, IFullVectorSource? fullVectors = null)
    {
        ArgumentNullException.ThrowIfNull(index);
        ArgumentNullException.ThrowIfNull(scorer);
        options ??= RerankingOptions.Default;
        options.CheckConsistent(nameof(options));
        if (fullVectors is not null && fullVectors.Dimension != index.Dimension)
        {
            ThrowHelper.ThrowDimensionMismatch(nameof(fullVectors), index.Dimension, fullVectors.Dimension);
        }

        _index = index;
        _scorer = scorer;
        _options = options;
        _fullVectors = fullVectors;
        _searchOptions = new SearchOptions { Filter = options.Filter, SearchWidth = options.SearchWidth };
    }

    /// <summary>The settings the pipeline runs with.</summary>
    public RerankingOptions Options => _options;

    /// <summary>The index candidates are retrieved from.</summary>
    public IVectorIndex Index => _index;

    /// <summary>Re-ranks one query.</summary>
    /// <param name="query">The query.</param>
    /// <returns>Up to <see cref="RerankingOptions.FinalCount"/> hits, highest score first, ties by ascending id.</returns>
    /// <exception cref="RerankingException">A stage failed (see the remarks on the class).</exception>
    public RerankedHit[] Rerank(TQuery query)
    {
        var buffer = new RerankedHit[_options.FinalCount];
        int written = Rerank(query, buffer);
        return written == buffer.Length ? buffer : buffer.AsSpan(0, written).ToArray();
    }

    /// <summary>Re-ranks one query into a caller's buffer, allocating nothing after warm-up.</summary>
    /// <param name="query">The query.</param>
    /// <param name="destination">Receives up to <c>min(destination.Length, FinalCount)</c> hits, best first.</param>
    /// <returns>How many hits were written: fewer than asked only when fewer candidates were retrieved.</returns>
    /// <exception cref="ArgumentException"><paramref name="destination"/> is empty.</exception>
    /// <exception cref="RerankingException">A stage failed.</exception>
    public int Rerank(TQuery query, Span<RerankedHit> destination)
    {
        if (destination.IsEmpty)
        {
            ThrowHelper.ThrowArgument(nameof(destination), "destination is empty; it needs room for at least one result.");
        }

        RerankingWorkspace workspace = Rent();
        try
        {
            int candidates = Prune(query, 0, workspace);
            ScoreAll(query, 0, candidates, workspace);
            return SelectBest(candidates, workspace, destination);
        }
        finally
        {
            _workspaces.Add(workspace);
        }
    }

    /// <summary>Re-ranks one query with the scorer's <see cref="PairwiseScorer{TQuery}.ScoreAsync"/>.</summary>
    /// <param name="query">The query.</param>
    /// <param name="cancellationToken">Cancels the scoring.</param>
    /// <returns>Up to <see cref="RerankingOptions.FinalCount"/> hits, best first.</returns>
    /// <exception cref="RerankingException">A stage failed.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    public async ValueTask<RerankedHit[]> RerankAsync(TQuery query, CancellationToken cancellationToken = default)
    {
        RerankingWorkspace workspace = Rent();
        try
        {
            int candidates = Prune(query, 0, workspace);
            await ScoreAllAsync(query, 0, candidates, workspace, cancellationToken).ConfigureAwait(false);
            var buffer = new RerankedHit[_options.FinalCount];
            int written = SelectBest(candidates, workspace, buffer);
            return written == buffer.Length ? buffer : buffer.AsSpan(0, written).ToArray();
        }
        finally
        {
            _workspaces.Add(workspace);
        }
    }

    /// <summary>Re-ranks many queries in parallel (up to <see cref="RerankingOptions.MaxDegreeOfParallelism"/> at once).</summary>
    /// <param name="queries">The queries.</param>
    /// <param name="progress">Optional; receives the number of queries completed so far, from worker threads.</param>
    /// <param name="cancellationToken">Stops the batch between queries.</param>
    /// <returns>The results of every query, each as <see cref="Rerank(TQuery)"/> would return them.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="queries"/> is null.</exception>
    /// <exception cref="RerankingException">A query failed; the one with the lowest index is reported.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    public RerankingResults RerankBatch(IReadOnlyList<TQuery> queries, IProgress<int>? progress = null, CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(queries);
        var results = new RerankingResults(queries.Count, _options.FinalCount);
        int completed = 0;
        var parallel = new ParallelOptions { MaxDegreeOfParallelism = RerankingCalibration.Threads(_options.MaxDegreeOfParallelism), CancellationToken = cancellationToken };
        try
        {
            Parallel.For(
                0,
                queries.Count,
                parallel,
                Rent,
                (i, _, workspace) =>
                {
                    TQuery query = queries[i];
                    int candidates = Prune(query, i, workspace);
                    ScoreAll(query, i, candidates, workspace);
                    results.Record(i, SelectBest(candidates, workspace, results.Slots(i)), workspace);
                    progress?.Report(Interlocked.Increment(ref completed));
                    return workspace;
                },
                _workspaces.Add);
        }
        catch (AggregateException e)
        {
            ThrowFirstFailure(e);
            throw;
        }

        return results;
    }

    /// <summary>Re-ranks many queries concurrently with the scorer's <see cref="PairwiseScorer{TQuery}.ScoreAsync"/>.</summary>
    /// <param name="queries">The queries.</param>
    /// <param name="progress">Optional; receives the number of queries completed so far.</param>
    /// <param name="cancellationToken">Cancels the batch.</param>
    /// <returns>The results of every query.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="queries"/> is null.</exception>
    /// <exception cref="RerankingException">A query failed; the one with the lowest index is reported.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    public async Task<RerankingResults> RerankBatchAsync(IReadOnlyList<TQuery> queries, IProgress<int>? progress = null, CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(queries);
        var results = new RerankingResults(queries.Count, _options.FinalCount);
        int completed = 0;
        var parallel = new ParallelOptions
        {
            MaxDegreeOfParallelism = RerankingCalibration.Threads(_options.MaxDegreeOfParallelism),
            CancellationToken = cancellationToken,
        };
        Task run = Parallel.ForAsync(0, queries.Count, parallel, async (i, token) =>
        {
            RerankingWorkspace workspace = Rent();
            try
            {
                TQuery query = queries[i];
                int candidates = Prune(query, i, workspace);
                await ScoreAllAsync(query, i, candidates, workspace, token).ConfigureAwait(false);
                results.Record(i, SelectBest(candidates, workspace, results.Slots(i)), workspace);
                progress?.Report(Interlocked.Increment(ref completed));
            }
            finally
            {
                _workspaces.Add(workspace);
            }
        });
        try
        {
            await run.ConfigureAwait(false);
        }
        catch (Exception) when (run.Exception is { } failures)
        {
            ThrowFirstFailure(failures);
            throw;
        }

        return results;
    }

    /// <summary>Checks one scorer call's output: the count and every score.</summary>
    internal static void CheckScores(int queryIndex, RerankingStage stage, int written, ReadOnlySpan<long> ids, ReadOnlySpan<float> scores, int offset)
    {
        if (written != ids.Length)
        {
            throw new RerankingException(queryIndex, stage, $"the scorer reported {written} scores for a batch of {ids.Length} candidates; it must score every candidate it is given.");
        }

        for (int i = 0; i < scores.Length; i++)
        {
            if (!float.IsFinite(scores[i]))
            {
                throw new RerankingException(queryIndex, stage, $"the scorer returned {scores[i].ToString(CultureInfo.InvariantCulture)} for candidate id {ids[i]} (candidate {offset + i}); every score must be a finite number.");
            }
        }
    }

    /// <summary>Rethrows the <see cref="RerankingException"/> of the lowest query index, or the first other failure.</summary>
    internal static void ThrowFirstFailure(AggregateException failures)
    {
        Exception? first = null;
        foreach (Exception e in failures.Flatten().InnerExceptions)
        {
            if (first is null
                || (e is RerankingException r && (first is not RerankingException f || r.QueryIndex < f.QueryIndex)))
            {
                first = e;
            }
        }

        if (first is not null)
        {
            ExceptionDispatchInfo.Capture(first).Throw();
        }
    }

    internal RerankingWorkspace Rent() => _workspaces.TryTake(out RerankingWorkspace? w) ? w : new RerankingWorkspace(_index.Dimension, _options);

    internal void Return(RerankingWorkspace workspace) => _workspaces.Add(workspace);

    // Retrieval and the optional exact stage. Leaves the surviving candidates, in retrieval order or by exact distance,
    // in Candidates and their ids in CandidateIds; returns their count. Calibration calls it to measure the stages.
    internal int Prune(TQuery query, int queryIndex, RerankingWorkspace w)
    {
        long start = Stopwatch.GetTimestamp();
        w.PairsScored = 0;
        w.ExactTicks = 0;
        int found;
        try
        {
            _scorer.WriteRetrievalVector(query, w.Vector);
        }
        catch (Exception e) when (e is not OperationCanceledException)
        {
            throw new RerankingException(queryIndex, RerankingStage.Retrieval, $"the scorer's retrieval vector failed: {e.GetType().Name}: {e.Message}", e);
        }

        try
        {
            found = _index.Search(w.Vector, w.Hits, _searchOptions);
        }
        catch (Exception e) when (e is not OperationCanceledException)
        {
            throw new RerankingException(queryIndex, RerankingStage.Retrieval, $"the index search failed: {e.GetType().Name}: {e.Message}", e);
        }

        for (int i = 0; i < found; i++)
        {
            w.Candidates[i] = new RerankingCandidate { Id = w.Hits[i].Id, RetrievalDistance = w.Hits[i].Distance, RetrievalRank = i, ExactDistance = float.NaN };
        }

        long retrieved = Stopwatch.GetTimestamp();
        w.RetrievalTicks = retrieved - start;
        if (_options.ExactRescoringDepth is int keep)
        {
            found = RescoreExactly(queryIndex, found, keep, w);
            w.ExactTicks = Stopwatch.GetTimestamp() - retrieved;
        }

        for (int i = 0; i < found; i++)
        {
            w.CandidateIds[i] = w.Candidates[i].Id;
        }

        return found;
    }

    private int RescoreExactly(int queryIndex, int found, int keep, RerankingWorkspace w)
    {
        DistanceMetric metric = _index.Metric;
        int live = 0;
        for (int i = 0; i < found; i++)
        {
            RerankingCandidate c = w.Candidates[i];
            bool present;
            try
            {
                present = _fullVectors is null ? _index.TryGetVector(c.Id, w.FullRow) : _fullVectors.TryGetVector(c.Id, w.FullRow);
            }
            catch (Exception e) when (e is not OperationCanceledException)
            {
                throw new RerankingException(queryIndex, RerankingStage.ExactRescoring, $"reading the full vector of id {c.Id} failed: {e.GetType().Name}: {e.Message}", e);
            }

            if (!present)
            {
                // Removed from the index since the search returned it: drop it, as a later search would.
                if (_fullVectors is null || !_index.Contains(c.Id))
                {
                    continue;
                }

                throw new RerankingException(queryIndex, RerankingStage.ExactRescoring, $"the full-vector source has no vector for id {c.Id}, which the index returned.");
            }

            // Cosine is computed from both norms, so the source need not store unit vectors.
            c.ExactDistance = VectorDistance.Compute(metric, w.Vector, w.FullRow);
            w.Candidates[live++] = c;
        }

        w.Candidates.AsSpan(0, live).Sort(default(ExactDistanceOrder));
        return Math.Min(live, keep);
    }

    private void ScoreAll(TQuery query, int queryIndex, int count, RerankingWorkspace w)
    {
        long start = Stopwatch.GetTimestamp();
        int batch = _options.ScoringBatchSize;
        for (int offset = 0; offset < count; offset += batch)
        {
            int length = Math.Min(batch, count - offset);
            ReadOnlySpan<long> ids = w.CandidateIds.AsSpan(offset, length);
            Span<float> scores = w.Scores.AsSpan(offset, length);
            int written;
            try
            {
                written = _scorer.Score(query, ids, scores);
            }
            catch (Exception e) when (e is not OperationCanceledException)
            {
                throw new RerankingException(queryIndex, RerankingStage.PairwiseScoring, $"the scorer threw {e.GetType().Name}: {e.Message}", e);
            }

            CheckScores(queryIndex, RerankingStage.PairwiseScoring, written, ids, scores, offset);
        }

        w.PairsScored = count;
        w.ScoringTicks = Stopwatch.GetTimestamp() - start;
    }

    private async ValueTask ScoreAllAsync(TQuery query, int queryIndex, int count, RerankingWorkspace w, CancellationToken cancellationToken)
    {
        long start = Stopwatch.GetTimestamp();
        int batch = _options.ScoringBatchSize;
        for (int offset = 0; offset < count; offset += batch)
        {
            cancellationToken.ThrowIfCancellationRequested();
            int length = Math.Min(batch, count - offset);
            int written;
            try
            {
                written = await _scorer.ScoreAsync(query, w.CandidateIds.AsMemory(offset, length), w.Scores.AsMemory(offset, length), cancellationToken).ConfigureAwait(false);
            }
            catch (Exception e) when (e is not OperationCanceledException)
            {
                throw new RerankingException(queryIndex, RerankingStage.PairwiseScoring, $"the scorer threw {e.GetType().Name}: {e.Message}", e);
            }

            CheckScores(queryIndex, RerankingStage.PairwiseScoring, written, w.CandidateIds.AsSpan(offset, length), w.Scores.AsSpan(offset, length), offset);
        }

        w.PairsScored = count;
        w.ScoringTicks = Stopwatch.GetTimestamp() - start;
    }

    private static int SelectBest(int count, RerankingWorkspace w, Span<RerankedHit> destination)
    {
        int k = Math.Min(destination.Length, w.BestScores.Length);
        var best = new ScoreSelection(w.BestScores.AsSpan(0, k), w.BestIds.AsSpan(0, k), w.BestPositions.AsSpan(0, k));
        for (int i = 0; i < count; i++)
        {
            best.Offer(w.Scores[i], w.CandidateIds[i], i);
        }

        ReadOnlySpan<int> positions = best.Positions;
        for (int r = 0; r < positions.Length; r++)
        {
            RerankingCandidate c = w.Candidates[positions[r]];
            destination[r] = new RerankedHit(c.Id, w.Scores[positions[r]], c.RetrievalDistance, c.RetrievalRank, c.ExactDistance);
        }

        return positions.Length;
    }
}
