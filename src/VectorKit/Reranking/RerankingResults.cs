using System.Diagnostics;

namespace VectorKit.Reranking;

/// <summary>
/// The results of a re-ranking batch: for each query up to <see cref="FinalCount"/> hits, best first, plus the work
/// each stage did.
/// </summary>
/// <remarks>Stored flat, <see cref="FinalCount"/> slots per query.</remarks>
public sealed class RerankingResults
{
    private readonly RerankedHit[] _hits;
    private readonly int[] _counts;
    private long _pairsScored;
    private long _retrievalTicks;
    private long _exactTicks;
    private long _scoringTicks;

    internal RerankingResults(int queryCount, int finalCount)
    {
        QueryCount = queryCount;
        FinalCount = finalCount;
        _hits = new RerankedHit[checked(queryCount * finalCount)];
        _counts = new int[queryCount];
    }

    /// <summary>The number of queries.</summary>
    public int QueryCount { get; }

    /// <summary>Results asked for per query.</summary>
    public int FinalCount { get; }

    /// <summary>Query–item pairs the pairwise scorer scored, over all queries.</summary>
    public long PairsScored => Volatile.Read(ref _pairsScored);

    /// <summary>Time spent in retrieval (the retrieval vector and the index search), summed over all queries and threads.</summary>
    public TimeSpan RetrievalTime => Stopwatch.GetElapsedTime(0, Volatile.Read(ref _retrievalTicks));

    /// <summary>Time spent re-scoring on full vectors, summed over all queries and threads; zero without that stage.</summary>
    public TimeSpan ExactRescoringTime => Stopwatch.GetElapsedTime(0, Volatile.Read(ref _exactTicks));

    /// <summary>Time spent in the pairwise scorer (including the checks of its scores), summed over all queries and threads.</summary>
    public TimeSpan ScoringTime => Stopwatch.GetElapsedTime(0, Volatile.Read(ref _scoringTicks));

    /// <summary>The hits of query <paramref name="queryIndex"/>, best first (highest score, ties by ascending id).</summary>
    /// <param name="queryIndex">Zero-based position of the query in the batch.</param>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="queryIndex"/> is outside [0, <see cref="QueryCount"/>).</exception>
    public ReadOnlySpan<RerankedHit> this[int queryIndex]
    {
        get
        {
            if ((uint)queryIndex >= (uint)QueryCount)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(queryIndex), queryIndex, $"must be in [0, {QueryCount})");
            }

            return new ReadOnlySpan<RerankedHit>(_hits, queryIndex * FinalCount, _counts[queryIndex]);
        }
    }

    internal Span<RerankedHit> Slots(int queryIndex) => new(_hits, queryIndex * FinalCount, FinalCount);

    internal void Record(int queryIndex, int count, RerankingWorkspace workspace)
    {
        _counts[queryIndex] = count;
        Interlocked.Add(ref _pairsScored, workspace.PairsScored);
        Interlocked.Add(ref _retrievalTicks, workspace.RetrievalTicks);
        Interlocked.Add(ref _exactTicks, workspace.ExactTicks);
        Interlocked.Add(ref _scoringTicks, workspace.ScoringTicks);
    }
}
