namespace VectorKit.Reranking;

/// <summary>Where a calibrated pipeline loses items of the scorer's true top k, stage by stage.</summary>
public enum RecallLossCause
{
    /// <summary>
    /// Not retrieved although an exact scan by the index's own metric ranks them within the retrieval depth: lost to
    /// the index's approximate search, recovered by a wider search (or by tuning the index to a higher recall).
    /// </summary>
    IndexSearch,

    /// <summary>
    /// Ranked below the retrieval depth by the index's metric itself: the retrieval vectors disagree with the scorer
    /// there, and only retrieving deeper recovers them.
    /// </summary>
    RetrievalDepth,

    /// <summary>
    /// Not retrieved, when the two causes above cannot be told apart: the index holds only approximations of its
    /// vectors (compressed codes without full vectors) and no <see cref="CalibrationOptions.FullVectors"/> were given.
    /// </summary>
    Retrieval,

    /// <summary>Retrieved, then dropped by the exact re-scoring stage keeping its nearest.</summary>
    ExactRescoring,

    /// <summary>Scored but not returned: zero for a scorer (and index) that answer the same way every time.</summary>
    PairwiseScoring,
}

/// <summary>
/// The fraction of the scorer's true top k lost for one cause, measured on the held-out queries. An item is counted
/// once, at the first stage that lost it, so a report's losses add up to one minus its held-out recall.
/// </summary>
/// <param name="Cause">Where the items were lost.</param>
/// <param name="Lost">The fraction of the true top k lost there, averaged over queries.</param>
/// <param name="LostLow">The lower end of its confidence interval.</param>
/// <param name="LostHigh">The upper end of its confidence interval.</param>
public sealed record RecallLoss(RecallLossCause Cause, double Lost, double LostLow, double LostHigh);
