namespace VectorKit.Evaluation;

/// <summary>How far a <see cref="SearchQuality.Measure"/> call has come.</summary>
/// <param name="Stage">The step in progress.</param>
/// <param name="Completed">Vectors added (build) or queries answered (search) so far.</param>
/// <param name="Total">Vectors to add or queries to answer in this step.</param>
public readonly record struct EvaluationProgress(EvaluationStage Stage, int Completed, int Total);
