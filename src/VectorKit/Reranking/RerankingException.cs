namespace VectorKit.Reranking;

/// <summary>
/// A re-ranking query failed: the scorer threw or returned an invalid result, or a stage could not run. Names the
/// query (its position in the batch; 0 for a single query) and the stage.
/// </summary>
public sealed class RerankingException : InvalidOperationException
{
    /// <summary>Creates the exception.</summary>
    /// <param name="queryIndex">The failing query's position in its batch (0 for a single query).</param>
    /// <param name="stage">The stage that failed.</param>
    /// <param name="problem">What went wrong.</param>
    /// <param name="innerException">The exception the stage threw, if any.</param>
    public RerankingException(int queryIndex, RerankingStage stage, string problem, Exception? innerException = null)
        : base($"Query {queryIndex}, stage {stage}: {problem}", innerException!)
    {
        QueryIndex = queryIndex;
        Stage = stage;
    }

    /// <summary>The failing query's position in its batch (0 for a single query).</summary>
    public int QueryIndex { get; }

    /// <summary>The stage that failed.</summary>
    public RerankingStage Stage { get; }
}
