using VectorKit.Indexes;

namespace VectorKit.Reranking;

/// <summary>One candidate between stages: where retrieval put it and, after the exact stage, its full-vector distance.</summary>
internal struct RerankingCandidate
{
    public long Id;
    public float RetrievalDistance;
    public int RetrievalRank;
    public float ExactDistance;
}

/// <summary>
/// The scratch buffers of one query in flight, sized once from the options and reused query after query (pooled by
/// the pipeline), so a query allocates nothing after warm-up. Also carries the query's stage timings.
/// </summary>
internal sealed class RerankingWorkspace
{
    public RerankingWorkspace(int dimension, RerankingOptions options)
    {
        int depth = options.RetrievalDepth;
        Vector = new float[dimension];
        FullRow = new float[dimension];
        Hits = new SearchHit[depth];
        Candidates = new RerankingCandidate[depth];
        CandidateIds = new long[depth];
        Scores = new float[depth];
        BestScores = new float[options.FinalCount];
        BestIds = new long[options.FinalCount];
        BestPositions = new int[options.FinalCount];
    }

    public float[] Vector { get; }

    public float[] FullRow { get; }

    public SearchHit[] Hits { get; }

    public RerankingCandidate[] Candidates { get; }

    public long[] CandidateIds { get; }

    public float[] Scores { get; }

    public float[] BestScores { get; }

    public long[] BestIds { get; }

    public int[] BestPositions { get; }

    // Stopwatch ticks and pairs scored for the query that last ran.
    public long RetrievalTicks;
    public long ExactTicks;
    public long ScoringTicks;
    public int PairsScored;
}

/// <summary>Orders candidates by full-vector distance, then id.</summary>
internal readonly struct ExactDistanceOrder : IComparer<RerankingCandidate>
{
    public int Compare(RerankingCandidate x, RerankingCandidate y)
    {
        int byDistance = x.ExactDistance.CompareTo(y.ExactDistance);
        return byDistance != 0 ? byDistance : x.Id.CompareTo(y.Id);
    }
}
