namespace VectorKit.Orleans;

/// <summary>Client-side retry and timeout settings of a <see cref="ShardedVectorCollection"/>.</summary>
public sealed class ShardedCollectionClientOptions
{
    /// <summary>The defaults.</summary>
    public static ShardedCollectionClientOptions Default { get; } = new();

    /// <summary>
    /// How long a write or search keeps retrying a shard that does not answer (a dead silo is detected and its shard
    /// copies re-activated elsewhere within this window when the cluster's membership settings allow it).
    /// </summary>
    public TimeSpan RetryWindow { get; init; } = TimeSpan.FromSeconds(60);

    /// <summary>How long one attempt of a write to one shard may take before it is retried.</summary>
    public TimeSpan AttemptTimeout { get; init; } = TimeSpan.FromSeconds(10);

    /// <summary>The first pause between attempts; it doubles up to one second.</summary>
    public TimeSpan FirstBackoff { get; init; } = TimeSpan.FromMilliseconds(50);
}
