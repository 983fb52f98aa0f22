namespace VectorKit.Evaluation;

/// <summary>The step an evaluation is in, as reported through <see cref="EvaluationProgress"/>.</summary>
public enum EvaluationStage
{
    /// <summary>Adding the data set to the index.</summary>
    Build = 0,

    /// <summary>Searching the query set.</summary>
    Search = 1,
}
