namespace VectorKit.Reranking;

/// <summary>The stages of a <see cref="RerankingPipeline{TQuery}"/>, in the order they run.</summary>
public enum RerankingStage
{
    /// <summary>Approximate (or exact) retrieval of candidates from the index, by the query's retrieval vector.</summary>
    Retrieval,

    /// <summary>Re-scoring the retrieved candidates on their full vectors, keeping the nearest (optional).</summary>
    ExactRescoring,

    /// <summary>The caller's pairwise scorer on the remaining candidates, keeping the highest scores.</summary>
    PairwiseScoring,

    /// <summary>Calibration only: the scorer run on the whole collection to find its true top results.</summary>
    ExhaustiveScoring,
}
