using System.Diagnostics;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;

namespace VectorKit.Tuning;

/// <summary>
/// Chooses an index's default search settings from a recall target: measures recall@k against exact neighbours over
/// a range of settings, picks the cheapest that meets the target, and reports the recall it gives on held-out queries.
/// One implementation serves every index kind: the graph's search width, the inverted file's lists probed and
/// re-scoring depth, and the 8-bit indexes' re-scoring depth.
/// </summary>
/// <remarks>
/// <para><b>Ground truth</b> is exact search over the index's own vectors (<see cref="VectorIndex.TryGetVector"/>: the
/// full vectors where the index keeps them, the decoded codes where it keeps none), copied a block at a time into an
/// exact index, so memory grows by one block, not by a copy of the whole index.</para>
/// <para><b>Queries.</b> Given queries should look like the searches the index will serve. Without them, queries are
/// drawn from the index: stored vectors picked at random (with replacement), each moved by Gaussian noise of standard
/// deviation <c>s / √dimension</c> per component, so the noise has length close to <c>s</c>, where <c>s</c> is
/// <see cref="RecallTuningOptions.NoiseScale"/> times the median distance from a stored vector to its nearest other
/// vector (measured on 64 of them). The noise keeps a query from being its own nearest neighbour at distance 0, which
/// would overstate recall.</para>
/// <para><b>Search over settings.</b> For each re-scoring depth (none, then 2k, 4k, ...: a depth of k or less returns
/// the same items as none; one pass when the index does not re-score) the width is doubled from its smallest useful value
/// until a setting meets the target (or doubling it stops gaining recall: the depth is the limit), then bisected down to
/// the narrowest width that meets it; deeper re-scoring stops once the narrowest width meets the target, once the width no
/// longer falls with the depth, or once two depths in a row cost more than the best so far. A setting meets the target
/// when the lower end of its recall interval on the tuning queries does (Wilson intervals on an effective number of
/// trials, as the re-ranking calibration uses). Of the settings that meet it, only those for which no other needs at most
/// the same width and depth can be the cheapest; when more than one is left, they are timed against each other on the
/// tuning queries in alternating rounds and the one with the least median time per query is chosen.</para>
/// <para><b>Thread safety.</b> Searches may run during tuning; writes should not, since they change the answers the
/// ground truth was taken from.</para>
/// </remarks>
public static class RecallTuning
{
    // Rows copied into one exact block for the ground truth.
    private const int TruthBlock = 65_536;

    // A measurement shorter than this is repeated (at most MaxRepeats runs in all) and its fastest run kept.
    private const double MinTimedSeconds = 0.05;
    private const int MaxRepeats = 5;

    // Rounds of the alternating timing of the cheapest candidates (odd: the median is one of them).
    private const int RunoffRounds = 7;

    // Below this gain in recall from doubling the width, the width search at a depth gives up (the depth limits it).
    private const double PlateauGain = 0.001;

    // Stored vectors whose nearest neighbour sets the noise of drawn queries.
    private const int NoiseSample = 64;

    /// <summary>Tunes <paramref name="index"/> on queries drawn from its own vectors.</summary>
    /// <param name="index">A trained index holding at least k items.</param>
    /// <param name="options">The target and sampling; <see langword="null"/> for <see cref="RecallTuningOptions.Default"/>.</param>
    /// <param name="progress">Optional; receives each phase and each setting measured.</param>
    /// <param name="cancellationToken">Checked between searches and blocks.</param>
    /// <returns>The curve measured, the chosen setting and its held-out recall.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="index"/> is null.</exception>
    /// <exception cref="ArgumentException">The index holds fewer than k items.</exception>
    /// <exception cref="IndexNotTrainedException">The index needs training and has not been trained.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    public static TuningReport Tune(VectorIndex index, RecallTuningOptions? options = null, IProgress<TuningProgress>? progress = null, CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(index);
        RecallTuningOptions o = options ?? RecallTuningOptions.Default;
        CheckSize(index, o.K);
        float[] queries = DrawQueries(index, o.DrawnQueries, o.NoiseScale, o.Seed, cancellationToken);
        return Run(index, queries, drawn: true, o, progress, cancellationToken);
    }

    /// <summary>Tunes <paramref name="index"/> on the caller's queries.</summary>
    /// <param name="index">A trained index holding at least k items.</param>
    /// <param name="queries">At least two queries, row after row, like those the index will serve.</param>
    /// <param name="options">The target and sampling; <see langword="null"/> for <see cref="RecallTuningOptions.Default"/>.</param>
    /// <param name="progress">Optional; receives each phase and each setting measured.</param>
    /// <param name="cancellationToken">Checked between searches and blocks.</param>
    /// <returns>The curve measured, the chosen setting and its held-out recall.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="index"/> is null.</exception>
    /// <exception cref="ArgumentException">The index holds fewer than k items, or <paramref name="queries"/> is not a multiple of the dimension, holds fewer than two queries or an invalid one.</exception>
    /// <exception cref="IndexNotTrainedException">The index needs training and has not been trained.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    public static TuningReport Tune(VectorIndex index, ReadOnlySpan<float> queries, RecallTuningOptions? options = null, IProgress<TuningProgress>? progress = null, CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(index);
        RecallTuningOptions o = options ?? RecallTuningOptions.Default;
        CheckSize(index, o.K);
        CheckQueries(queries, index.Dimension, 2);
        return Run(index, queries.ToArray(), drawn: false, o, progress, cancellationToken);
    }

    /// <summary>
    /// Measures the recall@k the index gives at its current defaults: a cheap re-check after many changes
    /// (<see cref="VectorIndex.ChangesSinceTuning"/>). Uses <paramref name="queries"/>, or draws 200 as
    /// <see cref="Tune(VectorIndex, RecallTuningOptions?, IProgress{TuningProgress}?, CancellationToken)"/> does.
    /// </summary>
    /// <param name="index">A trained index holding at least k items.</param>
    /// <param name="queries">Queries row after row, or empty to draw them.</param>
    /// <param name="options">Target, k, confidence, noise and seed (when the index was tuned, its target and k are used instead); <see langword="null"/> for the defaults.</param>
    /// <param name="cancellationToken">Checked between blocks.</param>
    /// <returns>The recall with its interval, and whether it falls short of the target.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="index"/> is null.</exception>
    /// <exception cref="ArgumentException">The index holds fewer than k items, or a query is invalid.</exception>
    /// <exception cref="IndexNotTrainedException">The index needs training and has not been trained.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    public static RecallCheck Check(VectorIndex index, ReadOnlySpan<float> queries = default, RecallTuningOptions? options = null, CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(index);
        RecallTuningOptions o = options ?? RecallTuningOptions.Default;
        TunedSearchDefaults? tuned = index.TunedDefaults;
        int k = tuned?.K ?? o.K;
        double target = tuned?.TargetRecall ?? o.TargetRecall;
        CheckSize(index, k);
        float[] q;
        if (queries.IsEmpty)
        {
            q = DrawQueries(index, 200, o.NoiseScale, o.Seed, cancellationToken);
        }
        else
        {
            CheckQueries(queries, index.Dimension, 1);
            q = queries.ToArray();
        }

        long[][] truth = ExactNeighbors(index, q, k, cancellationToken);
        long changes = index.ChangesSinceTuning;
        TuningPoint p = Measure(index, q, truth, null, null, k, RecallStatistics.TwoSidedZ(o.Confidence), SearchOptions.Default.MaxDegreeOfParallelism, cancellationToken, useDefaults: true);
        return new RecallCheck(target, k, p.Recall, p.RecallLow, p.RecallHigh, truth.Length, changes);
    }

    private static TuningReport Run(VectorIndex index, float[] queries, bool drawn, RecallTuningOptions o, IProgress<TuningProgress>? progress, CancellationToken ct)
    {
        int d = index.Dimension;
        int k = o.K;
        int n = queries.Length / d;
        progress?.Report(new TuningProgress(TuningStage.GroundTruth, 0, null));

        // A seeded shuffle splits the queries, so that given queries in some order (say by topic) split evenly.
        int[] order = new int[n];
        for (int i = 0; i < n; i++)
        {
            order[i] = i;
        }

        new Random(o.Seed).Shuffle(order);
        int heldCount = Math.Clamp((int)Math.Round(n * o.HeldOutFraction), 1, n - 1);
        int tuneCount = n - heldCount;
        float[] tuneQueries = Rows(queries, order.AsSpan(0, tuneCount), d);
        float[] heldQueries = Rows(queries, order.AsSpan(tuneCount), d);
        long[][] tuneTruth = ExactNeighbors(index, tuneQueries, k, ct);
        long[][] heldTruth = ExactNeighbors(index, heldQueries, k, ct);

        double z = RecallStatistics.TwoSidedZ(o.Confidence);
        SearchKnobs knobs = index.Knobs;
        int count = index.Count;
        var curve = new List<TuningPoint>();
        var clock = Stopwatch.StartNew();
        bool completed = true;

        TuningPoint Try(int? width, int? depth)
        {
            ct.ThrowIfCancellationRequested();
            if (o.TimeBudget is { } budget && clock.Elapsed > budget && curve.Count > 0)
            {
                throw new BudgetSpentException();
            }

            TuningPoint p = Measure(index, tuneQueries, tuneTruth, width, depth, k, z, o.MaxDegreeOfParallelism, ct, useDefaults: false);
            curve.Add(p);
            progress?.Report(new TuningProgress(TuningStage.Searching, curve.Count, p));
            return p;
        }

        bool Meets(TuningPoint p) => p.RecallLow >= o.TargetRecall;

        progress?.Report(new TuningProgress(TuningStage.Searching, 0, null));
        try
        {
            SearchSettings(knobs, count, k, Try, Meets);
        }
        catch (BudgetSpentException)
        {
            completed = false;
        }

        // The settings that meet the target and need no more of either knob than another that does are timed against
        // each other in alternation; their medians replace their single timings in the curve (time budget permitting).
        List<int> front = Front(curve, Meets);
        if (front.Count > 1 && !(o.TimeBudget is { } limit && clock.Elapsed > limit))
        {
            double[] medians = Runoff(front.Count, RunoffRounds, i => TimeOnce(index, tuneQueries, curve[front[i]], k, o.MaxDegreeOfParallelism, ct));
            for (int i = 0; i < front.Count; i++)
            {
                curve[front[i]] = curve[front[i]] with { MicrosecondsPerQuery = medians[i] };
            }
        }

        (TuningPoint chosen, bool met) = Choose(curve, Meets);
        progress?.Report(new TuningProgress(TuningStage.Verifying, curve.Count, chosen));
        TuningPoint held = Measure(index, heldQueries, heldTruth, chosen.SearchWidth, chosen.RescoreDepth, k, z, o.MaxDegreeOfParallelism, ct, useDefaults: false);
        TuningPoint untuned = Measure(
            index,
            heldQueries,
            heldTruth,
            knobs.MaxWidth > 0 ? knobs.DefaultWidth : null,
            knobs.Rescores ? knobs.DefaultDepth : null,
            k,
            z,
            o.MaxDegreeOfParallelism,
            ct,
            useDefaults: false);
        if (o.ApplyDefaults)
        {
            index.ApplyTunedDefaults(new TunedSearchDefaults(chosen.SearchWidth, chosen.RescoreDepth, o.TargetRecall, k));
        }

        return new TuningReport(o.TargetRecall, k, o.Confidence, curve.ToArray(), chosen, held, untuned, met, completed, o.ApplyDefaults, tuneCount, heldCount, drawn);
    }

    /// <summary>
    /// The search over settings (see the class remarks): each setting is measured by <paramref name="measure"/>, which
    /// adds it to the curve; <paramref name="meets"/> says whether a measured setting meets the target.
    /// </summary>
    internal static void SearchSettings(SearchKnobs knobs, int count, int k, Func<int?, int?, TuningPoint> measure, Func<TuningPoint, bool> meets)
    {
        int maxDepth = Math.Min(VectorIndexOptions.MaxRescoreDepth, count);
        if (knobs.MaxWidth == 0 && !knobs.Rescores)
        {
            measure(null, null);
        }
        else if (knobs.MaxWidth == 0)
        {
            if (!meets(measure(null, 0)) && maxDepth > k)
            {
                Smallest(k + 1, maxDepth, v => measure(null, v), meets);
            }
        }
        else
        {
            double bestCost = double.PositiveInfinity;
            int worse = 0;
            int? previousWidth = null;
            foreach (int? depth in Depths(knobs.Rescores, k, maxDepth))
            {
                int low = knobs.WidthCoversDepth ? Math.Max(k, depth ?? 0) : 1;
                int high = knobs.WidthCoversDepth ? Math.Min(knobs.MaxWidth, count) : knobs.MaxWidth;
                low = Math.Min(low, high);
                TuningPoint? found = Smallest(low, high, w => measure(w, depth), meets);
                if (found is null)
                {
                    continue;
                }

                // Deeper re-scoring only adds cost once the width stops falling with it.
                if (found.SearchWidth == low || found.SearchWidth >= previousWidth)
                {
                    break;
                }

                previousWidth = found.SearchWidth;

                if (found.MicrosecondsPerQuery < bestCost)
                {
                    bestCost = found.MicrosecondsPerQuery;
                    worse = 0;
                }
                else if (++worse == 2)
                {
                    break;
                }
            }
        }
    }

    // No re-scoring, then 2k, 4k, ... up to the cap; a single pass without a depth when the index does not re-score. A
    // depth of k or less re-scores only the k items returned, which leaves the set (and so the recall) of no re-scoring.
    internal static IEnumerable<int?> Depths(bool rescores, int k, int maxDepth)
    {
        if (!rescores)
        {
            yield return null;
            yield break;
        }

        yield return 0;
        for (long depth = 2L * k; depth <= maxDepth; depth *= 2)
        {
            yield return (int)depth;
        }
    }

    // The smallest value in [low, high] whose point meets the target: doubling, then bisection down to adjacent values
    // (recall is taken to rise with the value; the narrowest passing value is exact on the tuning queries).
    private static TuningPoint? Smallest(int low, int high, Func<int, TuningPoint> measure, Func<TuningPoint, bool> meets)
    {
        int failing = low - 1;
        int value = low;
        TuningPoint passing;
        double previous = double.NegativeInfinity;
        while (true)
        {
            TuningPoint p = measure(value);
            if (meets(p))
            {
                passing = p;
                break;
            }

            // A doubled width that gains (almost) nothing has reached what this depth can give: wider only costs more.
            if (value >= high || p.Recall - previous < PlateauGain)
            {
                return null;
            }

            previous = p.Recall;

            failing = value;
            value = (int)Math.Min(high, Math.Max(value + 1L, value * 2L));
        }

        while (value - failing > 1)
        {
            int middle = failing + ((value - failing) / 2);
            TuningPoint p = measure(middle);
            if (meets(p))
            {
                value = middle;
                passing = p;
            }
            else
            {
                failing = middle;
            }
        }

        return passing;
    }

    /// <summary>
    /// Positions in <paramref name="curve"/> of the settings that meet the target and for which no other setting meeting
    /// it needs at most the same width and at most the same depth (a missing knob counts as 0; of equal settings the
    /// first): the only candidates for the cheapest, since a search does no less work with more of either knob.
    /// </summary>
    internal static List<int> Front(IReadOnlyList<TuningPoint> curve, Func<TuningPoint, bool> meets)
    {
        var front = new List<int>();
        for (int i = 0; i < curve.Count; i++)
        {
            TuningPoint p = curve[i];
            if (!meets(p))
            {
                continue;
            }

            bool dominated = false;
            for (int j = 0; j < curve.Count && !dominated; j++)
            {
                TuningPoint other = curve[j];
                if (j == i || !meets(other))
                {
                    continue;
                }

                int w = p.SearchWidth ?? 0, d = p.RescoreDepth ?? 0, ow = other.SearchWidth ?? 0, od = other.RescoreDepth ?? 0;
                dominated = ow <= w && od <= d && (ow < w || od < d || j < i);
            }

            if (!dominated)
            {
                front.Add(i);
            }
        }

        return front;
    }

    /// <summary>
    /// Times <paramref name="count"/> candidates in <paramref name="rounds"/> rounds, each round timing every candidate
    /// once in an order rotated by one from the last, and returns each candidate's median: load that comes and goes
    /// then falls on all of them alike, and a spike on fewer than half of one's rounds does not move its median.
    /// </summary>
    internal static double[] Runoff(int count, int rounds, Func<int, double> timeOnce)
    {
        var times = new double[count][];
        for (int i = 0; i < count; i++)
        {
            times[i] = new double[rounds];
        }

        for (int r = 0; r < rounds; r++)
        {
            for (int j = 0; j < count; j++)
            {
                int i = (j + r) % count;
                times[i][r] = timeOnce(i);
            }
        }

        var medians = new double[count];
        for (int i = 0; i < count; i++)
        {
            Array.Sort(times[i]);
            medians[i] = rounds % 2 == 1 ? times[i][rounds / 2] : (times[i][(rounds / 2) - 1] + times[i][rounds / 2]) / 2;
        }

        return medians;
    }

    // Of the front (see Front), the least time per query, ties to the first; else the highest recall.
    internal static (TuningPoint Chosen, bool Met) Choose(IReadOnlyList<TuningPoint> curve, Func<TuningPoint, bool> meets)
    {
        TuningPoint? best = null;
        foreach (int i in Front(curve, meets))
        {
            if (best is null || curve[i].MicrosecondsPerQuery < best.MicrosecondsPerQuery)
            {
                best = curve[i];
            }
        }

        if (best is not null)
        {
            return (best, true);
        }

        TuningPoint top = curve[0];
        foreach (TuningPoint p in curve)
        {
            if (p.Recall > top.Recall || (p.Recall == top.Recall && p.MicrosecondsPerQuery < top.MicrosecondsPerQuery))
            {
                top = p;
            }
        }

        return (top, false);
    }

    // One single pass of the tuning queries at a setting: microseconds per query, summed over threads.
    private static double TimeOnce(VectorIndex index, float[] queries, TuningPoint setting, int k, int parallelism, CancellationToken ct)
    {
        var search = new SearchOptions { SearchWidth = setting.SearchWidth, RescoreDepth = setting.RescoreDepth, MaxDegreeOfParallelism = parallelism };
        int n = queries.Length / index.Dimension;
        long start = Stopwatch.GetTimestamp();
        index.SearchBatch(queries, k, search, null, ct);
        double seconds = Stopwatch.GetElapsedTime(start).TotalSeconds;
        int threads = parallelism == -1 ? Environment.ProcessorCount : parallelism;
        return seconds * 1e6 * Math.Min(threads, Math.Max(1, n)) / n;
    }

    private static TuningPoint Measure(VectorIndex index, float[] queries, long[][] truth, int? width, int? depth, int k, double z, int parallelism, CancellationToken ct, bool useDefaults)
    {
        // Spelled out even where a value is null, so that earlier tuned defaults never stand in for a setting under test
        // (null width or depth: the kind has none); the re-check alone measures the defaults themselves.
        var search = useDefaults
            ? new SearchOptions { MaxDegreeOfParallelism = parallelism }
            : new SearchOptions { SearchWidth = width, RescoreDepth = depth, MaxDegreeOfParallelism = parallelism };

        long start = Stopwatch.GetTimestamp();
        BatchSearchResults results = index.SearchBatch(queries, k, search, null, ct);
        double seconds = Stopwatch.GetElapsedTime(start).TotalSeconds;

        // A short run is repeated and its fastest time kept: other work on the machine only ever adds time.
        for (int repeat = 1; repeat < MaxRepeats && seconds * repeat < MinTimedSeconds; repeat++)
        {
            start = Stopwatch.GetTimestamp();
            index.SearchBatch(queries, k, search, null, ct);
            seconds = Math.Min(seconds, Stopwatch.GetElapsedTime(start).TotalSeconds);
        }
        int threads = parallelism == -1 ? Environment.ProcessorCount : parallelism;
        int n = truth.Length;
        int[] found = new int[n];
        for (int q = 0; q < n; q++)
        {
            ReadOnlySpan<SearchHit> hits = results[q];
            long[] row = truth[q];
            int hit = 0;
            for (int i = 0; i < hits.Length; i++)
            {
                if (Array.IndexOf(row, hits[i].Id) >= 0)
                {
                    hit++;
                }
            }

            found[q] = hit;
        }

        (double mean, double low, double high) = RecallStatistics.Estimate(found, k, z);
        return new TuningPoint(width, depth, mean, low, high, seconds * 1e6 * Math.Min(threads, Math.Max(1, n)) / n);
    }

    /// <summary>
    /// The exact k nearest of each query among the index's vectors, ties by ascending id: blocks of the index's rows are
    /// copied into an exact index one at a time, and each query keeps the best k of its running list and the block's.
    /// </summary>
    internal static long[][] ExactNeighbors(VectorIndex index, float[] queries, int k, CancellationToken ct)
        => ExactNeighbors(index, index.GetIds(), index.TryGetVector, queries, k, ct);

    /// <summary>
    /// The exact k nearest of each query among the vectors of <paramref name="ids"/> read with
    /// <paramref name="readVector"/> (an id it cannot read is skipped), under the index's metric; ties by ascending id.
    /// </summary>
    internal static long[][] ExactNeighbors(IVectorIndex index, long[] ids, ReadStoredVector readVector, float[] queries, int k, CancellationToken ct)
    {
        int d = index.Dimension;
        int n = queries.Length / d;
        var best = new SearchHit[n][];
        for (int q = 0; q < n; q++)
        {
            best[q] = [];
        }

        float[] block = new float[Math.Min(ids.Length, TruthBlock) * d];
        for (int start = 0; start < ids.Length; start += TruthBlock)
        {
            ct.ThrowIfCancellationRequested();
            int length = Math.Min(TruthBlock, ids.Length - start);
            var blockIds = new List<long>(length);
            for (int i = 0; i < length; i++)
            {
                // An id removed since the list was taken is skipped.
                if (readVector(ids[start + i], block.AsSpan(blockIds.Count * d, d)))
                {
                    blockIds.Add(ids[start + i]);
                }
            }

            if (blockIds.Count == 0)
            {
                continue;
            }

            using var exact = new ExactIndex(d, index.Metric);
            exact.AddRange(blockIds.ToArray(), block.AsSpan(0, blockIds.Count * d), null, ct);
            BatchSearchResults results = exact.SearchBatch(queries, k, null, null, ct);
            for (int q = 0; q < n; q++)
            {
                best[q] = MergeBest(best[q], results[q], k);
            }
        }

        var truth = new long[n][];
        for (int q = 0; q < n; q++)
        {
            truth[q] = new long[best[q].Length];
            for (int i = 0; i < truth[q].Length; i++)
            {
                truth[q][i] = best[q][i].Id;
            }
        }

        return truth;
    }

    /// <summary>Reads one stored vector; <see langword="false"/> when the id has none.</summary>
    internal delegate bool ReadStoredVector(long id, Span<float> destination);

    // The best k of two lists sorted by distance, ties by ascending id (the order every index returns).
    private static SearchHit[] MergeBest(SearchHit[] a, ReadOnlySpan<SearchHit> b, int k)
    {
        var merged = new SearchHit[Math.Min(k, a.Length + b.Length)];
        int i = 0, j = 0;
        for (int m = 0; m < merged.Length; m++)
        {
            bool takeA = j == b.Length || (i < a.Length && (a[i].Distance < b[j].Distance || (a[i].Distance == b[j].Distance && a[i].Id < b[j].Id)));
            merged[m] = takeA ? a[i++] : b[j++];
        }

        return merged;
    }

    /// <summary>Queries drawn from the index's vectors with Gaussian noise (see the class remarks).</summary>
    internal static float[] DrawQueries(VectorIndex index, int count, double noiseScale, int seed, CancellationToken ct)
    {
        int d = index.Dimension;
        long[] ids = index.GetIds();
        var random = new Random(seed);

        // The typical nearest-neighbour distance, from a few stored vectors (each finds itself first).
        int sampled = Math.Min(NoiseSample, ids.Length);
        float[] sample = new float[sampled * d];
        long[] sampleIds = new long[sampled];
        for (int i = 0; i < sampled; i++)
        {
            sampleIds[i] = ids[random.Next(ids.Length)];
            index.TryGetVector(sampleIds[i], sample.AsSpan(i * d, d));
        }

        long[][] near = ExactNeighbors(index, sample, 2, ct);
        var distances = new List<double>(sampled);
        float[] other = new float[d];
        for (int i = 0; i < sampled; i++)
        {
            foreach (long id in near[i])
            {
                if (id != sampleIds[i] && index.TryGetVector(id, other))
                {
                    double sum = 0;
                    for (int j = 0; j < d; j++)
                    {
                        double diff = sample[(i * d) + j] - other[j];
                        sum += diff * diff;
                    }

                    distances.Add(Math.Sqrt(sum));
                    break;
                }
            }
        }

        distances.Sort();
        double typical = distances.Count == 0 ? 0 : distances[distances.Count / 2];
        double sigma = noiseScale * typical / Math.Sqrt(d);

        float[] queries = new float[count * d];
        for (int i = 0; i < count; i++)
        {
            Span<float> row = queries.AsSpan(i * d, d);
            while (!index.TryGetVector(ids[random.Next(ids.Length)], row))
            {
                // Removed since GetIds: draw again.
            }

            for (int j = 0; j < d; j++)
            {
                row[j] += (float)(sigma * Gaussian(random));
            }
        }

        return queries;
    }

    // Box–Muller; 1 − NextDouble() lies in (0, 1], so the logarithm is finite.
    private static double Gaussian(Random random)
        => Math.Sqrt(-2 * Math.Log(1 - random.NextDouble())) * Math.Cos(2 * Math.PI * random.NextDouble());

    private static float[] Rows(float[] queries, ReadOnlySpan<int> rows, int d)
    {
        float[] result = new float[rows.Length * d];
        for (int i = 0; i < rows.Length; i++)
        {
            queries.AsSpan(rows[i] * d, d).CopyTo(result.AsSpan(i * d));
        }

        return result;
    }

    private static void CheckSize(VectorIndex index, int k)
    {
        int count = index.Count;
        if (count < k)
        {
            ThrowHelper.ThrowArgument(nameof(index), $"The index holds {count} items; tuning recall@{k} needs at least {k}.");
        }
    }

    private static void CheckQueries(ReadOnlySpan<float> queries, int dimension, int least)
    {
        if (queries.Length % dimension != 0 || queries.Length / dimension < least)
        {
            ThrowHelper.ThrowArgument(nameof(queries), $"The queries hold {queries.Length} components; expected a multiple of the dimension {dimension}, at least {least} queries.");
        }
    }

    private sealed class BudgetSpentException : Exception
    {
    }
}
