namespace VectorKit.Orleans;

/// <summary>Silo-side settings of the sharding package.</summary>
public sealed class VectorKitShardingOptions
{
    /// <summary>How long a primary waits for a replica to apply a forwarded write before acknowledging without it (the replica then catches up from the log).</summary>
    public TimeSpan ReplicaForwardTimeout { get; set; } = TimeSpan.FromSeconds(30);

    /// <summary>The most queries one routed search may carry.</summary>
    public int MaxQueriesPerSearch { get; set; } = 1024;

    /// <summary>The largest k a routed search may ask for.</summary>
    public int MaxK { get; set; } = 1000;
}
