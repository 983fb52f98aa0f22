namespace VectorKit.Reranking;

/// <summary>How <see cref="RerankingCalibration.Calibrate"/> decides that a depth meets the target on the tuning queries.</summary>
public enum CalibrationSelection
{
    /// <summary>
    /// The lower end of the tuning recall's confidence interval must reach the target (the default): the chosen depth
    /// is deeper than the bare minimum, and the true recall is at least the target with the stated confidence. A
    /// target of 1 is met only by a depth that found every item for every tuning query.
    /// </summary>
    LowerConfidenceBound,

    /// <summary>
    /// The tuning recall itself must reach the target: the shallowest depth, but picking the first depth that crosses
    /// the target favours depths whose tuning sample happened to be lucky, so held-out recall tends to fall just short.
    /// </summary>
    PointEstimate,
}
