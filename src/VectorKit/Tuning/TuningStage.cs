namespace VectorKit.Tuning;

/// <summary>The phases of <see cref="RecallTuning"/>, in order.</summary>
public enum TuningStage
{
    /// <summary>Copying the index's vectors and finding every query's exact neighbours.</summary>
    GroundTruth,

    /// <summary>Measuring settings on the tuning queries.</summary>
    Searching,

    /// <summary>Measuring the chosen setting and the untuned defaults on the held-out queries.</summary>
    Verifying,
}
