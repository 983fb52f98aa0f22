using System.Text.RegularExpressions;
using VectorKit.Distance;

namespace VectorKit.Orleans;

/// <summary>
/// What a sharded collection is: its name, vector shape, shard count S, replica count R and the index kind each shard
/// starts with. Fixed when the collection is created; every shard reads it from the store when it activates.
/// </summary>
/// <remarks>Immutable after construction; <see cref="Validate"/> checks every field (the client and the store call it).</remarks>
[GenerateSerializer]
[Immutable]
public sealed partial record ShardedCollectionDefinition
{
    /// <summary>The largest shard count accepted.</summary>
    public const int MaxShardCount = 4096;

    /// <summary>The largest replica count accepted.</summary>
    public const int MaxReplicaCount = 8;

    /// <summary>The collection name: 1 to 64 characters from <c>a–z</c>, <c>0–9</c> and <c>-</c>; it names files and grains.</summary>
    [Id(0)]
    public required string Name { get; init; }

    /// <summary>The vector dimension.</summary>
    [Id(1)]
    public required int Dimension { get; init; }

    /// <summary>The distance metric.</summary>
    [Id(2)]
    public DistanceMetric Metric { get; init; } = DistanceMetric.SquaredEuclidean;

    /// <summary>The number of shards, S; ids map to shards by <see cref="ShardHash.ShardOf"/>.</summary>
    [Id(3)]
    public int ShardCount { get; init; } = 8;

    /// <summary>Copies of each shard, R (1 = no replica); copy 0 is the primary, which takes the writes.</summary>
    [Id(4)]
    public int ReplicaCount { get; init; } = 2;

    /// <summary>The index kind an empty shard builds.</summary>
    [Id(5)]
    public ShardIndexKind IndexKind { get; init; } = ShardIndexKind.Exact;

    /// <summary>Graph shards: links per node (the graph index's default when null).</summary>
    [Id(6)]
    public int? GraphLinksPerNode { get; init; }

    /// <summary>Graph shards: the build width (the graph index's default when null).</summary>
    [Id(7)]
    public int? GraphBuildWidth { get; init; }

    /// <summary>Graph shards: the default search width (the graph index's default when null).</summary>
    [Id(8)]
    public int? GraphSearchWidth { get; init; }

    /// <summary>The primary saves a snapshot of its index and empties its write-ahead log after this many logged writes.</summary>
    [Id(9)]
    public int SnapshotEveryWrites { get; init; } = 256;

    /// <summary>Checks every field.</summary>
    /// <exception cref="ArgumentException">A field is out of range; the message names it, the expected and the actual value.</exception>
    public void Validate()
    {
        if (Name is null || !NamePattern().IsMatch(Name))
        {
            throw new ArgumentException($"Name must be 1 to 64 characters from a-z, 0-9 and '-'; it is '{Name}'.", nameof(Name));
        }

        Check(Dimension is >= 1 and <= 65_536, nameof(Dimension), "in [1, 65536]", Dimension);
        Check(Enum.IsDefined(Metric), nameof(Metric), "a defined DistanceMetric", Metric);
        Check(ShardCount is >= 1 and <= MaxShardCount, nameof(ShardCount), $"in [1, {MaxShardCount}]", ShardCount);
        Check(ReplicaCount is >= 1 and <= MaxReplicaCount, nameof(ReplicaCount), $"in [1, {MaxReplicaCount}]", ReplicaCount);
        Check(Enum.IsDefined(IndexKind), nameof(IndexKind), "a defined ShardIndexKind", IndexKind);
        Check(GraphLinksPerNode is null or >= 2, nameof(GraphLinksPerNode), "null or at least 2", GraphLinksPerNode);
        Check(GraphBuildWidth is null or >= 1, nameof(GraphBuildWidth), "null or positive", GraphBuildWidth);
        Check(GraphSearchWidth is null or >= 1, nameof(GraphSearchWidth), "null or positive", GraphSearchWidth);
        Check(SnapshotEveryWrites >= 1, nameof(SnapshotEveryWrites), "positive", SnapshotEveryWrites);
    }

    private static void Check(bool ok, string name, string expected, object? actual)
    {
        if (!ok)
        {
            throw new ArgumentException($"{name} must be {expected}; it is {actual?.ToString() ?? "null"}.", name);
        }
    }

    [GeneratedRegex("^[a-z0-9-]{1,64}$", RegexOptions.CultureInvariant)]
    private static partial Regex NamePattern();
}
