namespace VectorKit.Tests.Indexes.Stress;

/// <summary>What a stress run did and checked; fields are updated with <see cref="Interlocked"/>.</summary>
internal sealed class StressCounters
{
    public long Writes;
    public long Compacts;
    public long Searches;
    public long BatchSearches;
    public long VectorReads;
    public long ContainsCalls;
    public long Saves;
    public long Checkpoints;

    /// <summary>Hits whose id and distance were checked against the versions the model allows.</summary>
    public long HitsChecked;

    /// <summary>Results checked for completeness against items that held throughout the call (exhaustive searches).</summary>
    public long CompletenessChecks;

    /// <summary>Vectors and presences checked (reads, read-backs after writes, saved copies, checkpoints).</summary>
    public long ItemsChecked;

    /// <summary>Checks made at the next checkpoint, once the stored form of a version written during the call was known.</summary>
    public long Deferred;

    /// <summary>Checkpoint queries compared with the reference (exact answers, recall, saved copies).</summary>
    public long CheckpointQueries;

    /// <summary>Graph only: checkpoint searches for an item's own vector that did not return it.</summary>
    public long SelfSearchMisses;

    public long Operations => Writes + Compacts + Searches + BatchSearches + VectorReads + ContainsCalls + Saves;

    public void Add(StressCounters other)
    {
        foreach (System.Reflection.FieldInfo field in typeof(StressCounters).GetFields())
        {
            field.SetValue(this, (long)field.GetValue(this)! + (long)field.GetValue(other)!);
        }
    }

    public override string ToString()
        => $"{Operations:N0} operations ({Writes:N0} writes, {Compacts:N0} compactions, {Searches:N0} searches, {BatchSearches:N0} batch searches, "
            + $"{VectorReads:N0} vector reads, {ContainsCalls:N0} membership reads, {Saves:N0} saves reloaded); {Checkpoints:N0} checkpoints; checks: "
            + $"{HitsChecked:N0} hits, {CompletenessChecks:N0} completeness, {ItemsChecked:N0} items, {CheckpointQueries:N0} checkpoint queries; "
            + $"{Deferred:N0} deferred, {SelfSearchMisses:N0} graph self-search misses";
}
