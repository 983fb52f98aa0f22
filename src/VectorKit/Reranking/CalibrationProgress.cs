namespace VectorKit.Reranking;

/// <summary>The phases of <see cref="RerankingCalibration.Calibrate"/>, in order.</summary>
public enum CalibrationStage
{
    /// <summary>Scoring the whole collection for every sample query (the expensive, one-off part).</summary>
    ExhaustiveScoring,

    /// <summary>Searching for the smallest depths that meet the target on the tuning queries.</summary>
    Tuning,

    /// <summary>Running the chosen pipeline on the held-out queries.</summary>
    Verifying,
}

/// <summary>Progress of a calibration: <paramref name="Completed"/> of <paramref name="Total"/> steps of <paramref name="Stage"/>.</summary>
/// <param name="Stage">The running phase.</param>
/// <param name="Completed">Steps done in this phase (queries when scoring or verifying, settings tried when tuning).</param>
/// <param name="Total">Steps in this phase (when tuning, an upper estimate).</param>
public readonly record struct CalibrationProgress(CalibrationStage Stage, int Completed, int Total);
