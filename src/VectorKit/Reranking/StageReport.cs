namespace VectorKit.Reranking;

/// <summary>One stage of a calibrated pipeline, measured on the held-out queries.</summary>
/// <param name="Stage">The stage.</param>
/// <param name="Depth">Candidates the stage keeps (for the pairwise scoring stage, the results returned).</param>
/// <param name="SearchWidth">The search width (retrieval only); <see langword="null"/> for the index's default.</param>
/// <param name="Recall">The fraction of the scorer's true top k still present after the stage (recall kept).</param>
/// <param name="RecallLow">The lower end of the recall's confidence interval.</param>
/// <param name="RecallHigh">The upper end of the recall's confidence interval.</param>
/// <param name="ScorerCallsPerQuery">Query–item pairs the pairwise scorer scores per query in this stage.</param>
/// <param name="MillisecondsPerQuery">Measured time per query in this stage, summed over threads.</param>
public sealed record StageReport(
    RerankingStage Stage,
    int Depth,
    int? SearchWidth,
    double Recall,
    double RecallLow,
    double RecallHigh,
    double ScorerCallsPerQuery,
    double MillisecondsPerQuery);
