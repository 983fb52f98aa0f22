namespace VectorKit.Tuning;

/// <summary>One setting measured by the tuning: its recall with the interval, and its cost.</summary>
/// <param name="SearchWidth">The search width, or <see langword="null"/> when the index has none.</param>
/// <param name="RescoreDepth">The re-scoring depth, or <see langword="null"/> when the index does not re-score.</param>
/// <param name="Recall">Mean recall@k over the queries.</param>
/// <param name="RecallLow">The lower end of the recall's confidence interval.</param>
/// <param name="RecallHigh">The upper end of the recall's confidence interval.</param>
/// <param name="MicrosecondsPerQuery">Measured search time per query, summed over threads.</param>
public sealed record TuningPoint(
    int? SearchWidth,
    int? RescoreDepth,
    double Recall,
    double RecallLow,
    double RecallHigh,
    double MicrosecondsPerQuery);
