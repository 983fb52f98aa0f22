using System.Diagnostics;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.Internal;
using VectorKit.Tuning;

namespace VectorKit.Reranking;

/// <summary>
/// Chooses the candidate depths (and search width) of a <see cref="RerankingPipeline{TQuery}"/> for a target recall
/// of the scorer's own top k, and reports what each stage costs in recall, scorer calls and time.
/// </summary>
/// <remarks>
/// <para><b>Method.</b> (1) The sample queries are split, seeded, into tuning and held-out queries. (2) For every
/// sample query the scorer ranks the whole collection once (<see cref="ScoreEverything"/>): its true top k. (3) On the
/// tuning queries, for each search width, a bisection finds the smallest retrieval depth whose recall — the fraction
/// of the true top k among the retrieved candidates, which is exactly the fraction the pipeline returns, since an item
/// of the scorer's top k that reaches the scorer always stays in its top k — meets the target under
/// <see cref="CalibrationOptions.Selection"/> (by default, the lower end of its confidence interval must reach it); with
/// <see cref="CalibrationOptions.ExactRescoringOverfetch"/> the retrieval and exact depths are chosen jointly: each
/// retrieval depth from that smallest one up to the over-fetch limit is re-scored and its shortest exact prefix meeting
/// the target kept. The setting with the least estimated time per query wins: measured pruning time plus scorer calls
/// × the scorer's measured time per pair. (4) The chosen pipeline runs on the held-out queries, and each stage's
/// recall is reported with a confidence interval. (5) Every true item it does not return is attributed to the first
/// stage that lost it — the index's search, the retrieval depth (told apart by an exact scan of the collection by the
/// index's metric), exact re-scoring or the scorer — each loss with its interval (see
/// <see cref="CalibrationReport.RecallLosses"/>).</para>
/// <para><b>Assumption.</b> The bisection assumes recall does not fall as depth grows: true for an exact index, whose
/// deeper results extend the shallower ones, and very nearly so for a graph index; the held-out check measures the
/// result either way.</para>
/// <para><b>Reproducibility.</b> The split, the exhaustive top k and every depth are determined by the seed and the
/// data. The choice between several search widths, and between joint retrieval and exact depths, uses measured
/// times and can differ between machines.</para>
/// </remarks>
public static class RerankingCalibration
{
    /// <summary>
    /// The fewest sample queries <see cref="Calibrate"/> accepts for these options: enough held-out queries for a
    /// Wilson interval at the target recall no wider than ± <see cref="CalibrationOptions.MaxUncertainty"/>, counting
    /// each query as one trial; and enough tuning queries that the selection rule can be met at all — under
    /// <see cref="CalibrationSelection.LowerConfidenceBound"/>, n tuning queries that all find everything give a lower
    /// bound of n / (n + z²), which must reach the target, so n ≥ z² t / (1 − t) (73 for t = 0.95 at 95 %).
    /// </summary>
    /// <param name="options">The calibration options; <see langword="null"/> for <see cref="CalibrationOptions.Default"/>.</param>
    /// <returns>The number of sample queries needed.</returns>
    public static int RequiredSampleSize(CalibrationOptions? options = null)
    {
        options ??= CalibrationOptions.Default;
        int heldOut = RequiredHeldOut(options);
        int tuning = RequiredTuning(options);
        int n = heldOut + tuning;
        while (HeldOutCount(n, options.HeldOutFraction) < heldOut || n - HeldOutCount(n, options.HeldOutFraction) < tuning)
        {
            n++;
        }

        return n;
    }

    /// <summary>
    /// Scores every item of the collection against every query and keeps each query's top <paramref name="k"/>: the
    /// answer a pipeline is measured against. Expensive by design (queries × items scorer calls); runs queries in parallel.
    /// </summary>
    /// <typeparam name="TQuery">The caller's query type.</typeparam>
    /// <param name="scorer">The pairwise scorer.</param>
    /// <param name="queries">The queries.</param>
    /// <param name="collectionIds">Every item id that could be a result.</param>
    /// <param name="k">Results kept per query.</param>
    /// <param name="maxDegreeOfParallelism">The most threads; -1 for one per core.</param>
    /// <param name="progress">Optional; receives the number of queries completed.</param>
    /// <param name="cancellationToken">Checked between scorer calls.</param>
    /// <returns>For each query, up to <paramref name="k"/> ids, highest score first, ties by ascending id.</returns>
    /// <exception cref="ArgumentNullException">An argument is null.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="k"/> is not positive, or <paramref name="maxDegreeOfParallelism"/> is 0 or below -1.</exception>
    /// <exception cref="ArgumentException">An id appears more than once in <paramref name="collectionIds"/>.</exception>
    /// <exception cref="RerankingException">The scorer threw or returned an invalid result (stage <see cref="RerankingStage.ExhaustiveScoring"/>).</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    public static long[][] ScoreEverything<TQuery>(
        PairwiseScorer<TQuery> scorer,
        IReadOnlyList<TQuery> queries,
        IReadOnlyList<long> collectionIds,
        int k,
        int maxDegreeOfParallelism = -1,
        IProgress<int>? progress = null,
        CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(scorer);
        ArgumentNullException.ThrowIfNull(queries);
        ArgumentNullException.ThrowIfNull(collectionIds);
        if (k <= 0)
        {
            ThrowHelper.ThrowArgumentOutOfRange(nameof(k), k, "must be positive");
        }

        if (maxDegreeOfParallelism == 0 || maxDegreeOfParallelism < -1)
        {
            ThrowHelper.ThrowArgumentOutOfRange(nameof(maxDegreeOfParallelism), maxDegreeOfParallelism, "must be -1 (all cores) or a positive thread count");
        }

        int[] all = new int[queries.Count];
        for (int i = 0; i < all.Length; i++)
        {
            all[i] = i;
        }

        long[] ids = AsArray(collectionIds);
        CheckDistinct(ids);
        return Exhaustive(scorer, queries, all, ids, k, 1024, maxDegreeOfParallelism, progress, cancellationToken, out _);
    }

    /// <summary>Chooses the smallest candidate depths that keep <see cref="CalibrationOptions.TargetRecall"/> of the scorer's top k.</summary>
    /// <typeparam name="TQuery">The caller's query type.</typeparam>
    /// <param name="index">The index the pipeline will retrieve from.</param>
    /// <param name="scorer">The pairwise scorer.</param>
    /// <param name="sampleQueries">Queries like the ones the pipeline will serve; at least <see cref="RequiredSampleSize"/>.</param>
    /// <param name="options">Target, confidence, split and limits; <see langword="null"/> for <see cref="CalibrationOptions.Default"/>.</param>
    /// <param name="progress">Optional; receives the phase and its progress, from worker threads.</param>
    /// <param name="cancellationToken">Checked between scorer calls and searches.</param>
    /// <returns>The chosen settings and the measured report.</returns>
    /// <exception cref="ArgumentNullException">An argument is null.</exception>
    /// <exception cref="ArgumentException">The sample is too small for the requested confidence and uncertainty (the message says how many queries are needed); the collection is empty or lists an id twice; or <see cref="CalibrationOptions.MaxRetrievalDepth"/> is below <see cref="CalibrationOptions.FinalCount"/>.</exception>
    /// <exception cref="NotSupportedException">No <see cref="CalibrationOptions.CollectionIds"/> were given and the index cannot list its ids.</exception>
    /// <exception cref="RerankingException">The scorer threw or returned an invalid result; the query and stage are named.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    public static CalibrationReport Calibrate<TQuery>(
        IVectorIndex index,
        PairwiseScorer<TQuery> scorer,
        IReadOnlyList<TQuery> sampleQueries,
        CalibrationOptions? options = null,
        IProgress<CalibrationProgress>? progress = null,
        CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(index);
        ArgumentNullException.ThrowIfNull(scorer);
        ArgumentNullException.ThrowIfNull(sampleQueries);
        options ??= CalibrationOptions.Default;
        double z = RecallStatistics.TwoSidedZ(options.Confidence);
        int n = sampleQueries.Count;
        int heldOutCount = HeldOutCount(n, options.HeldOutFraction);
        int requiredHeldOut = RequiredHeldOut(options);
        int requiredTuning = RequiredTuning(options);
        if (heldOutCount < requiredHeldOut || n - heldOutCount < requiredTuning)
        {
            ThrowHelper.ThrowArgument(
                nameof(sampleQueries),
                $"The calibration sample has {n} queries, {heldOutCount} of them held out and {n - heldOutCount} for tuning. Recall {options.TargetRecall} at {options.Confidence * 100:0.#} % confidence needs at least {requiredHeldOut} held-out queries (for an interval of ±{options.MaxUncertainty}) and {requiredTuning} tuning queries (for the {options.Selection} rule to be attainable): a sample of at least {RequiredSampleSize(options)} queries with HeldOutFraction {options.HeldOutFraction}.");
        }

        long[] ids = options.CollectionIds is null ? index.GetIds() : AsArray(options.CollectionIds);
        if (ids.Length == 0)
        {
            ThrowHelper.ThrowArgument(nameof(options), "The collection is empty: there is nothing to rank.");
        }

        CheckDistinct(ids);

        int k = options.FinalCount;
        if (options.MaxRetrievalDepth < k)
        {
            ThrowHelper.ThrowArgument(nameof(options), $"MaxRetrievalDepth ({options.MaxRetrievalDepth}) is less than FinalCount ({k}); a stage cannot return more results than it receives candidates.");
        }

        int truthSize = Math.Min(k, ids.Length);
        int maxDepth = Math.Max(k, Math.Min(options.MaxRetrievalDepth, ids.Length));

        // (1) The seeded split; each part in sample order so results line up with the caller's list.
        int[] order = new int[n];
        for (int i = 0; i < n; i++)
        {
            order[i] = i;
        }

        new Random(options.Seed).Shuffle(order);
        int[] heldOut = order[..heldOutCount];
        int[] tuning = order[heldOutCount..];
        Array.Sort(heldOut);
        Array.Sort(tuning);

        // (2) The scorer's true top k for every sample query.
        var exhaustiveProgress = progress is null ? null : new InlineProgress<int>(done => progress.Report(new CalibrationProgress(CalibrationStage.ExhaustiveScoring, done, n)));
        long[][] truth = Exhaustive(scorer, sampleQueries, order, ids, k, options.ScoringBatchSize, options.MaxDegreeOfParallelism, exhaustiveProgress, cancellationToken, out long exhaustiveTicks);
        double secondsPerPair = exhaustiveTicks / (double)Stopwatch.Frequency / ((double)n * ids.Length);

        // (3) The cheapest setting that meets the target on the tuning queries.
        var run = new Run<TQuery>(index, scorer, sampleQueries, truth, truthSize, options, cancellationToken);
        IReadOnlyList<int?> widths = options.SearchWidths is { } given ? given.Select(w => (int?)w).ToArray() : [null];
        int steps = widths.Count * (3 + (int)Math.Ceiling(Math.Log2(maxDepth + 1)) + (options.ExactRescoringOverfetch is int o ? JointDepthCount(o) : 0));
        int stepsDone = 0;
        void Step() => progress?.Report(new CalibrationProgress(CalibrationStage.Tuning, Math.Min(++stepsDone, steps), steps));

        Setting? best = null;
        Setting? fallback = null;
        foreach (int? width in widths)
        {
            Setting setting = Tune(run, tuning, width, maxDepth, secondsPerPair, Step);
            if (setting.MeetsTarget)
            {
                if (best is null || setting.EstimatedSeconds < best.EstimatedSeconds)
                {
                    best = setting;
                }
            }
            else if (fallback is null || setting.Recall > fallback.Recall)
            {
                fallback = setting;
            }
        }

        Setting chosen = best ?? fallback!;
        var settings = new RerankingOptions
        {
            FinalCount = k,
            RetrievalDepth = chosen.RetrievalDepth,
            ExactRescoringDepth = chosen.ExactDepth,
            SearchWidth = chosen.Width,
            ScoringBatchSize = options.ScoringBatchSize,
            MaxDegreeOfParallelism = options.MaxDegreeOfParallelism,
        };

        // (4) The chosen pipeline on the held-out queries, stage by stage.
        return Verify(run, heldOut, settings, chosen, best is not null, ids, exhaustiveTicks / (double)Stopwatch.Frequency * 1000 / n, z, progress);
    }

    // The smallest retrieval depth (and exact depth) meeting the target at one width, on the tuning queries.
    private static Setting Tune<TQuery>(Run<TQuery> run, int[] tuning, int? width, int maxDepth, double secondsPerPair, Action step)
    {
        double target = run.Options.TargetRecall;
        double z = RecallStatistics.TwoSidedZ(run.Options.Confidence);
        CalibrationSelection rule = run.Options.Selection;
        var measured = new Dictionary<int, Measurement>();
        Measurement At(int depth)
        {
            if (measured.TryGetValue(depth, out Measurement? known))
            {
                return known;
            }

            Measurement m = run.Measure(tuning, depth, null, width);
            measured[depth] = m;
            step();
            return m;
        }

        // Depths below k cannot be configured (a stage cannot return more than it receives).
        int low = run.Options.FinalCount;
        Measurement deepest = At(maxDepth);
        if (!deepest.Meets(maxDepth, target, z, rule))
        {
            return new Setting(width, maxDepth, null, deepest.Recall(maxDepth), double.PositiveInfinity, false);
        }

        int depth = maxDepth;
        if (At(low).Meets(low, target, z, rule))
        {
            depth = low;
        }
        else
        {
            // Invariant: depth meets the target, low does not.
            while (low + 1 < depth)
            {
                int mid = low + ((depth - low) / 2);
                if (At(mid).Meets(mid, target, z, rule))
                {
                    depth = mid;
                }
                else
                {
                    low = mid;
                }
            }
        }

        Measurement retrieval = At(depth);
        if (run.Options.ExactRescoringOverfetch is not int overfetch)
        {
            return new Setting(width, depth, null, retrieval.Recall(depth), retrieval.SecondsPerQuery + (depth * secondsPerPair), true);
        }

        // The retrieval and exact depths are chosen jointly: retrieving deeper costs search and re-scoring time but
        // can let the exact stage hand the scorer fewer candidates. Each retrieval depth from the smallest that meets
        // the target alone up to the over-fetch limit is re-scored, the shortest exact prefix meeting the target kept,
        // and the cheapest pair wins.
        Setting? best = null;
        Setting? last = null;
        foreach (int fetched in JointDepths(depth, overfetch, maxDepth))
        {
            Measurement exact = run.Measure(tuning, fetched, fetched, width);
            step();
            int keep = fetched;
            for (int e = run.Options.FinalCount; e <= fetched; e++)
            {
                if (exact.Meets(e, target, z, rule))
                {
                    keep = e;
                    break;
                }
            }

            bool meets = exact.Meets(keep, target, z, rule);
            var setting = new Setting(width, fetched, keep, exact.Recall(keep), exact.SecondsPerQuery + (keep * secondsPerPair), meets);
            last = setting;
            if (meets && (best is null || setting.EstimatedSeconds < best.EstimatedSeconds))
            {
                best = setting;
            }
        }

        return best ?? last!;
    }

    // Retrieval depths tried with an exact stage: the smallest meeting the target alone, then steps of 1.5× up to
    // `overfetch` times it (capped at the deepest allowed), the limit itself always included.
    internal static IEnumerable<int> JointDepths(int depth, int overfetch, int maxDepth)
    {
        int limit = (int)Math.Min(maxDepth, (long)depth * overfetch);
        int d = Math.Min(depth, limit);
        while (d < limit)
        {
            yield return d;
            d = (int)Math.Min(limit, Math.Max(d + 1L, (long)Math.Ceiling(d * 1.5)));
        }

        yield return limit;
    }

    // How many depths JointDepths yields (for progress).
    private static int JointDepthCount(int overfetch) => overfetch <= 1 ? 1 : 2 + (int)Math.Ceiling(Math.Log(overfetch) / Math.Log(1.5));

    private static CalibrationReport Verify<TQuery>(Run<TQuery> run, int[] heldOut, RerankingOptions settings, Setting chosen, bool reached, long[] ids, double exhaustiveMilliseconds, double z, IProgress<CalibrationProgress>? progress)
    {
        int truthSize = run.TruthSize;
        var queries = new SubsetList<TQuery>(run.Queries, heldOut);
        var pipeline = new RerankingPipeline<TQuery>(run.Index, run.Scorer, settings, run.Options.FullVectors);
        var verifyProgress = progress is null ? null : new InlineProgress<int>(done => progress.Report(new CalibrationProgress(CalibrationStage.Verifying, done, heldOut.Length)));
        RerankingResults results = pipeline.RerankBatch(queries, verifyProgress, run.CancellationToken);
        int[] found = new int[heldOut.Length];
        for (int i = 0; i < heldOut.Length; i++)
        {
            long[] truth = run.Truth[heldOut[i]];
            foreach (RerankedHit hit in results[i])
            {
                if (Array.IndexOf(truth, hit.Id) >= 0)
                {
                    found[i]++;
                }
            }
        }

        double perQuery = 1.0 / heldOut.Length;
        var stages = new List<StageReport>();
        Measurement retrieval = run.Measure(heldOut, settings.RetrievalDepth, null, settings.SearchWidth);
        (double rMean, double rLow, double rHigh) = RecallStatistics.Estimate(retrieval.Found(settings.RetrievalDepth), truthSize, z);
        stages.Add(new StageReport(RerankingStage.Retrieval, settings.RetrievalDepth, settings.SearchWidth, rMean, rLow, rHigh, 0, results.RetrievalTime.TotalMilliseconds * perQuery));
        int[] scored = retrieval.Found(settings.RetrievalDepth);
        if (settings.ExactRescoringDepth is int keep)
        {
            Measurement exact = run.Measure(heldOut, settings.RetrievalDepth, settings.RetrievalDepth, settings.SearchWidth);
            scored = exact.Found(keep);
            (double eMean, double eLow, double eHigh) = RecallStatistics.Estimate(scored, truthSize, z);
            stages.Add(new StageReport(RerankingStage.ExactRescoring, keep, null, eMean, eLow, eHigh, 0, results.ExactRescoringTime.TotalMilliseconds * perQuery));
        }

        (double mean, double low, double high) = RecallStatistics.Estimate(found, truthSize, z);
        double calls = results.PairsScored / (double)heldOut.Length;
        stages.Add(new StageReport(RerankingStage.PairwiseScoring, settings.FinalCount, null, mean, low, high, calls, results.ScoringTime.TotalMilliseconds * perQuery));
        int collectionSize = ids.Length;
        List<RecallLoss> losses = Losses(run, heldOut, settings, retrieval, scored, found, ids, z);
        return new CalibrationReport
        {
            Settings = settings,
            Stages = stages,
            TargetRecall = run.Options.TargetRecall,
            Confidence = run.Options.Confidence,
            Seed = run.Options.Seed,
            CollectionSize = collectionSize,
            TuningQueryCount = run.Queries.Count - heldOut.Length,
            HeldOutQueryCount = heldOut.Length,
            TuningRecall = chosen.Recall,
            TargetReachedOnTuning = reached,
            HeldOutRecall = mean,
            HeldOutRecallLow = low,
            HeldOutRecallHigh = high,
            ExhaustiveScorerCallsPerQuery = collectionSize,
            ExhaustiveMillisecondsPerQuery = exhaustiveMilliseconds,
            ScorerCallReduction = calls > 0 ? collectionSize / calls : double.PositiveInfinity,
            RecallLosses = losses,
            IndexDefaults = (run.Index as VectorIndex)?.TunedDefaults,
        };
    }

    // Where each held-out query's missing true items were dropped. Every item of the scorer's top k that is not
    // returned is counted once, at the first stage that lost it, so the losses add up to one minus the final recall.
    private static List<RecallLoss> Losses<TQuery>(Run<TQuery> run, int[] heldOut, RerankingOptions settings, Measurement retrieval, int[] scored, int[] returned, long[] ids, double z)
    {
        int n = heldOut.Length;
        int depth = settings.RetrievalDepth;
        int truthSize = run.TruthSize;
        int[] retrieved = retrieval.Found(depth);
        long[][]? exactTop = ExactRetrieval(run, heldOut, depth, ids);
        int[] notRetrieved = new int[n];
        int[] missedBySearch = new int[n];
        int[] belowDepth = new int[n];
        int[] droppedByRescoring = new int[n];
        int[] droppedByScorer = new int[n];
        for (int j = 0; j < n; j++)
        {
            long[] truth = run.Truth[heldOut[j]];
            notRetrieved[j] = truthSize - retrieved[j];
            if (exactTop is not null)
            {
                for (int t = 0; t < truth.Length; t++)
                {
                    if (!retrieval.Kept(j, t, depth))
                    {
                        if (Array.IndexOf(exactTop[j], truth[t]) >= 0)
                        {
                            missedBySearch[j]++;
                        }
                        else
                        {
                            belowDepth[j]++;
                        }
                    }
                }
            }

            droppedByRescoring[j] = retrieved[j] - scored[j];

            // The scored candidates are those the pruning measurement kept; a scorer whose scores repeat returns every
            // true item among them, so only an unrepeatable scorer (or index) makes this non-zero.
            droppedByScorer[j] = Math.Max(0, scored[j] - returned[j]);
        }

        var losses = new List<RecallLoss>();
        void Add(RecallLossCause cause, int[] lost)
        {
            (double mean, double low, double high) = RecallStatistics.Estimate(lost, truthSize, z);
            losses.Add(new RecallLoss(cause, mean, low, high));
        }

        if (exactTop is null)
        {
            Add(RecallLossCause.Retrieval, notRetrieved);
        }
        else
        {
            Add(RecallLossCause.IndexSearch, missedBySearch);
            Add(RecallLossCause.RetrievalDepth, belowDepth);
        }

        if (settings.ExactRescoringDepth is not null)
        {
            Add(RecallLossCause.ExactRescoring, droppedByRescoring);
        }

        Add(RecallLossCause.PairwiseScoring, droppedByScorer);
        return losses;
    }

    // The exact nearest `depth` items by the index's own metric for each held-out query's retrieval vector, or null
    // when the index keeps only approximations of its vectors and no full vectors were given.
    private static long[][]? ExactRetrieval<TQuery>(Run<TQuery> run, int[] heldOut, int depth, long[] ids)
    {
        IVectorIndex index = run.Index;
        IFullVectorSource? full = run.Options.FullVectors;
        bool exactVectors = full is not null || index is not VectorIndex v || index.Options.Encoding == VectorEncoding.Float32 || v.KeepsFullVectors || (v.ReadsFullVectorsExternally && v.FullVectorSource is not null);
        if (!exactVectors)
        {
            return null;
        }

        int d = index.Dimension;
        float[] vectors = new float[heldOut.Length * d];
        for (int j = 0; j < heldOut.Length; j++)
        {
            try
            {
                run.Scorer.WriteRetrievalVector(run.Queries[heldOut[j]], vectors.AsSpan(j * d, d));
            }
            catch (Exception e) when (e is not OperationCanceledException)
            {
                throw new RerankingException(heldOut[j], RerankingStage.Retrieval, $"the scorer's retrieval vector failed: {e.GetType().Name}: {e.Message}", e);
            }
        }

        RecallTuning.ReadStoredVector read = full is not null ? full.TryGetVector : index.TryGetVector;
        return RecallTuning.ExactNeighbors(index, ids, read, vectors, depth, run.CancellationToken);
    }

    // The scorer's top k over the whole collection for the listed queries (indexes into queries); the result is
    // indexed like queries. Ticks: scorer time summed over threads.
    private static long[][] Exhaustive<TQuery>(
        PairwiseScorer<TQuery> scorer,
        IReadOnlyList<TQuery> queries,
        int[] which,
        long[] ids,
        int k,
        int batch,
        int maxDegreeOfParallelism,
        IProgress<int>? progress,
        CancellationToken cancellationToken,
        out long scoringTicks)
    {
        var truth = new long[queries.Count][];
        int kept = Math.Min(k, ids.Length);
        int completed = 0;
        long ticks = 0;
        var parallel = new ParallelOptions { MaxDegreeOfParallelism = Threads(maxDegreeOfParallelism), CancellationToken = cancellationToken };
        try
        {
            Parallel.For(
                0,
                which.Length,
                parallel,
                () => new ExhaustiveScratch(Math.Min(batch, ids.Length), kept),
                (j, _, scratch) =>
                {
                    int q = which[j];
                    TQuery query = queries[q];
                    var best = new ScoreSelection(scratch.BestScores, scratch.BestIds, scratch.BestPositions);
                    long start = Stopwatch.GetTimestamp();
                    for (int offset = 0; offset < ids.Length; offset += batch)
                    {
                        cancellationToken.ThrowIfCancellationRequested();
                        int length = Math.Min(batch, ids.Length - offset);
                        ReadOnlySpan<long> chunk = ids.AsSpan(offset, length);
                        Span<float> scores = scratch.Scores.AsSpan(0, length);
                        int written;
                        try
                        {
                            written = scorer.Score(query, chunk, scores);
                        }
                        catch (Exception e) when (e is not OperationCanceledException)
                        {
                            throw new RerankingException(q, RerankingStage.ExhaustiveScoring, $"the scorer threw {e.GetType().Name}: {e.Message}", e);
                        }

                        RerankingPipeline<TQuery>.CheckScores(q, RerankingStage.ExhaustiveScoring, written, chunk, scores, offset);
                        for (int i = 0; i < length; i++)
                        {
                            best.Offer(scores[i], chunk[i], offset + i);
                        }
                    }

                    Interlocked.Add(ref ticks, Stopwatch.GetTimestamp() - start);
                    truth[q] = best.Ids.ToArray();
                    progress?.Report(Interlocked.Increment(ref completed));
                    return scratch;
                },
                _ => { });
        }
        catch (AggregateException e)
        {
            RerankingPipeline<TQuery>.ThrowFirstFailure(e);
            throw;
        }

        scoringTicks = ticks;
        return truth;
    }

    private static int RequiredHeldOut(CalibrationOptions options)
        => RecallStatistics.RequiredQueries(options.TargetRecall, RecallStatistics.TwoSidedZ(options.Confidence), options.MaxUncertainty);

    // Under the lower-bound rule, the fewest tuning queries whose Wilson lower bound can reach the target at all
    // (every query finding everything, one trial per query): n / (n + z²) ≥ t.
    private static int RequiredTuning(CalibrationOptions options)
    {
        if (options.Selection != CalibrationSelection.LowerConfidenceBound || options.TargetRecall >= 1)
        {
            return 1;
        }

        double z = RecallStatistics.TwoSidedZ(options.Confidence);
        int n = Math.Max(1, (int)Math.Floor(z * z * options.TargetRecall / (1 - options.TargetRecall)));
        while (RecallStatistics.Wilson(1, n, z).Low < options.TargetRecall)
        {
            n++;
        }

        return n;
    }

    private static int HeldOutCount(int n, double fraction) => (int)Math.Clamp(Math.Round(n * fraction, MidpointRounding.AwayFromZero), 0, n);

    // -1 means one thread per core: never more, or the thread pool adds threads to long iterations and the
    // per-query times (summed over threads) count time-sharing as work.
    internal static int Threads(int maxDegreeOfParallelism) => maxDegreeOfParallelism == -1 ? Environment.ProcessorCount : maxDegreeOfParallelism;

    private static long[] AsArray(IReadOnlyList<long> ids) => ids as long[] ?? ids.ToArray();

    private static void CheckDistinct(long[] ids)
    {
        var seen = new HashSet<long>(ids.Length, KeyedIdComparer.Instance);
        foreach (long id in ids)
        {
            if (!seen.Add(id))
            {
                ThrowHelper.ThrowArgument("options", $"CollectionIds lists id {id} more than once; each item must appear once.");
            }
        }
    }

    private sealed record Setting(int? Width, int RetrievalDepth, int? ExactDepth, double Recall, double EstimatedSeconds, bool MeetsTarget);

    private sealed class ExhaustiveScratch(int batch, int k)
    {
        public float[] Scores { get; } = new float[batch];

        public float[] BestScores { get; } = new float[k];

        public long[] BestIds { get; } = new long[k];

        public int[] BestPositions { get; } = new int[k];
    }

    // Where each query's true top-k items sit in its surviving candidates (−1: pruned), and the stages' time.
    private sealed class Measurement(int[][] positions, int truthSize, double secondsPerQuery)
    {
        // Whether the first `depth` candidates meet the target under the selection rule.
        public bool Meets(int depth, double target, double z, CalibrationSelection rule)
        {
            (double mean, double low, _) = RecallStatistics.Estimate(Found(depth), truthSize, z);
            return rule == CalibrationSelection.PointEstimate || target == 1.0 ? mean >= target : low >= target;
        }

        public double SecondsPerQuery { get; } = secondsPerQuery;

        // Whether true item `t` of query `j` is among the first `depth` surviving candidates.
        public bool Kept(int j, int t, int depth) => positions[j][t] >= 0 && positions[j][t] < depth;

        // Items of the true top k among the first `depth` surviving candidates, per query.
        public int[] Found(int depth)
        {
            int[] found = new int[positions.Length];
            for (int q = 0; q < positions.Length; q++)
            {
                foreach (int p in positions[q])
                {
                    if (p >= 0 && p < depth)
                    {
                        found[q]++;
                    }
                }
            }

            return found;
        }

        public double Recall(int depth)
        {
            int[] found = Found(depth);
            long total = 0;
            foreach (int f in found)
            {
                total += f;
            }

            return found.Length == 0 ? double.NaN : total / ((double)truthSize * found.Length);
        }
    }

    // Everything one calibration shares between its phases.
    private sealed class Run<TQuery>(IVectorIndex index, PairwiseScorer<TQuery> scorer, IReadOnlyList<TQuery> queries, long[][] truth, int truthSize, CalibrationOptions options, CancellationToken cancellationToken)
    {
        public IVectorIndex Index { get; } = index;

        public PairwiseScorer<TQuery> Scorer { get; } = scorer;

        public IReadOnlyList<TQuery> Queries { get; } = queries;

        public long[][] Truth { get; } = truth;

        public int TruthSize { get; } = truthSize;

        public CalibrationOptions Options { get; } = options;

        public CancellationToken CancellationToken { get; } = cancellationToken;

        // Runs the pruning stages of a pipeline with these depths on the listed queries (no scoring).
        public Measurement Measure(int[] which, int retrievalDepth, int? exactDepth, int? width)
        {
            var settings = new RerankingOptions
            {
                FinalCount = TruthSize,
                RetrievalDepth = retrievalDepth,
                ExactRescoringDepth = exactDepth,
                SearchWidth = width,
            };
            var pipeline = new RerankingPipeline<TQuery>(Index, Scorer, settings, Options.FullVectors);
            int[][] positions = new int[which.Length][];
            long ticks = 0;
            var parallel = new ParallelOptions { MaxDegreeOfParallelism = Threads(Options.MaxDegreeOfParallelism), CancellationToken = CancellationToken };
            try
            {
                Parallel.For(
                    0,
                    which.Length,
                    parallel,
                    pipeline.Rent,
                    (j, _, w) =>
                    {
                        int q = which[j];
                        int count = pipeline.Prune(Queries[q], q, w);
                        long[] truth = Truth[q];
                        int[] at = new int[truth.Length];
                        at.AsSpan().Fill(-1);
                        for (int c = 0; c < count; c++)
                        {
                            int t = Array.IndexOf(truth, w.CandidateIds[c]);
                            if (t >= 0)
                            {
                                at[t] = c;
                            }
                        }

                        positions[j] = at;
                        Interlocked.Add(ref ticks, w.RetrievalTicks + w.ExactTicks);
                        return w;
                    },
                    pipeline.Return);
            }
            catch (AggregateException e)
            {
                RerankingPipeline<TQuery>.ThrowFirstFailure(e);
                throw;
            }

            return new Measurement(positions, TruthSize, ticks / (double)Stopwatch.Frequency / Math.Max(1, which.Length));
        }
    }

    // A view of some of the sample queries, in the given order.
    private sealed class SubsetList<T>(IReadOnlyList<T> all, int[] which) : IReadOnlyList<T>
    {
        public int Count => which.Length;

        public T this[int index] => all[which[index]];

        public IEnumerator<T> GetEnumerator()
        {
            foreach (int i in which)
            {
                yield return all[i];
            }
        }

        System.Collections.IEnumerator System.Collections.IEnumerable.GetEnumerator() => GetEnumerator();
    }

    // Reports on the calling thread (Progress<T> would post to a captured context, out of order).
    private sealed class InlineProgress<T>(Action<T> report) : IProgress<T>
    {
        public void Report(T value) => report(value);
    }
}
