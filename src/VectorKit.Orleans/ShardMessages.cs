using VectorKit.Indexes;

namespace VectorKit.Orleans;

/// <summary>A shard's acknowledgement of a write: durable in the shard's log when returned.</summary>
/// <param name="Shard">The shard.</param>
/// <param name="Sequence">The write's log sequence number in that shard.</param>
/// <param name="ReplicasApplied">How many copies (the primary included) hold the write in memory; the others load it from the log when they next activate or notice the gap.</param>
/// <param name="Changed">Upserts: how many ids replaced an existing item; removals: how many ids existed.</param>
[GenerateSerializer]
[Immutable]
public sealed record ShardWriteAck(
    [property: Id(0)] int Shard,
    [property: Id(1)] long Sequence,
    [property: Id(2)] int ReplicasApplied,
    [property: Id(3)] int Changed);

/// <summary>Queries for one shard: <paramref name="Count"/> rows of the collection's dimension in <paramref name="Queries"/>.</summary>
/// <param name="Queries">The query rows.</param>
/// <param name="Count">How many queries.</param>
/// <param name="K">Hits wanted per query.</param>
/// <param name="SearchWidth">The index's search width, or <see langword="null"/> for its default.</param>
/// <param name="Filter">An id filter, or <see langword="null"/>.</param>
[GenerateSerializer]
[Immutable]
public sealed record ShardQuery(
    [property: Id(0)] float[] Queries,
    [property: Id(1)] int Count,
    [property: Id(2)] int K,
    [property: Id(3)] int? SearchWidth,
    [property: Id(4)] IdFilter? Filter);

/// <summary>One shard's answer: query <c>q</c>'s hits are slots <c>[q·K, q·K + Counts[q])</c>, best first.</summary>
/// <param name="Hits">The hits.</param>
/// <param name="Counts">Hits found per query.</param>
[GenerateSerializer]
[Immutable]
public sealed record ShardHits(
    [property: Id(0)] SearchHit[] Hits,
    [property: Id(1)] int[] Counts);

/// <summary>The state of one copy of one shard.</summary>
/// <param name="Shard">The shard.</param>
/// <param name="Replica">The copy (0 = primary).</param>
/// <param name="Available">Whether it serves; false after a failed load.</param>
/// <param name="Problem">Why it does not serve, or <see langword="null"/>.</param>
/// <param name="Count">Items held.</param>
/// <param name="Sequence">The last write applied.</param>
/// <param name="Silo">The silo hosting it.</param>
[GenerateSerializer]
[Immutable]
public sealed record ShardStatus(
    [property: Id(0)] int Shard,
    [property: Id(1)] int Replica,
    [property: Id(2)] bool Available,
    [property: Id(3)] string? Problem,
    [property: Id(4)] int Count,
    [property: Id(5)] long Sequence,
    [property: Id(6)] string Silo);

/// <summary>A search through the router: <see cref="QueryCount"/> rows in <see cref="Queries"/>.</summary>
[GenerateSerializer]
[Immutable]
public sealed record RoutedSearch
{
    /// <summary>The query rows, row by row.</summary>
    [Id(0)]
    public required float[] Queries { get; init; }

    /// <summary>How many queries.</summary>
    [Id(1)]
    public required int QueryCount { get; init; }

    /// <summary>Hits wanted per query.</summary>
    [Id(2)]
    public required int K { get; init; }

    /// <summary>Per-shard search width, or <see langword="null"/> for each index's default.</summary>
    [Id(3)]
    public int? SearchWidth { get; init; }

    /// <summary>An id filter, or <see langword="null"/>.</summary>
    [Id(4)]
    public IdFilter? Filter { get; init; }

    /// <summary>How long to wait for the shards.</summary>
    [Id(5)]
    public TimeSpan Timeout { get; init; } = TimeSpan.FromSeconds(10);

    /// <summary>Return what the reachable shards found instead of failing when a shard does not answer.</summary>
    [Id(6)]
    public bool AllowPartial { get; init; }
}

/// <summary>The router's answer.</summary>
/// <param name="Hits">Per query, the merged global top k, best first, ties by ascending id.</param>
/// <param name="MissingShards">Shards that did not answer (only with <see cref="RoutedSearch.AllowPartial"/>); empty when complete.</param>
/// <param name="Problems">Why each missing shard did not answer, in the same order.</param>
[GenerateSerializer]
[Immutable]
public sealed record RoutedSearchResult(
    [property: Id(0)] SearchHit[][] Hits,
    [property: Id(1)] int[] MissingShards,
    [property: Id(2)] string[] Problems)
{
    /// <summary>Whether some shard did not answer, so the hits may miss items.</summary>
    public bool IsPartial => MissingShards.Length > 0;
}
