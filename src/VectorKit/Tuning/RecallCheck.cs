namespace VectorKit.Tuning;

/// <summary>The recall an index gives at its current default settings, from <see cref="RecallTuning.Check"/>.</summary>
/// <param name="TargetRecall">The target the defaults were tuned for (or the one asked about when never tuned).</param>
/// <param name="K">The number of neighbours the recall counts.</param>
/// <param name="Recall">Mean recall@k over the check's queries.</param>
/// <param name="RecallLow">The lower end of the recall's confidence interval.</param>
/// <param name="RecallHigh">The upper end of the recall's confidence interval.</param>
/// <param name="Queries">The queries measured.</param>
/// <param name="ChangesSinceTuning">The index's <see cref="Indexes.VectorIndex.ChangesSinceTuning"/> at the check.</param>
public sealed record RecallCheck(double TargetRecall, int K, double Recall, double RecallLow, double RecallHigh, int Queries, long ChangesSinceTuning)
{
    /// <summary>Whether the recall is below the target beyond doubt: the whole interval lies under it. Re-tune then.</summary>
    public bool FallsShort => RecallHigh < TargetRecall;
}
