namespace VectorKit.Orleans;

/// <summary>Settings of one search of a <see cref="ShardedVectorCollection"/>.</summary>
public sealed class ShardedSearchOptions
{
    /// <summary>The defaults: every shard, each index's default width, 10 s per attempt, complete answers only.</summary>
    public static ShardedSearchOptions Default { get; } = new();

    /// <summary>Per-shard search width, or <see langword="null"/> for each index's default.</summary>
    public int? SearchWidth { get; init; }

    /// <summary>An id filter, or <see langword="null"/>.</summary>
    public IdFilter? Filter { get; init; }

    /// <summary>How long one routed attempt waits for the shards.</summary>
    public TimeSpan Timeout { get; init; } = TimeSpan.FromSeconds(10);

    /// <summary>
    /// Return at once what the reachable shards found (flagged <see cref="RoutedSearchResult.IsPartial"/>, with the
    /// missing shards named) instead of retrying and then failing with a <see cref="ShardUnavailableException"/>.
    /// </summary>
    public bool AllowPartial { get; init; }
}
