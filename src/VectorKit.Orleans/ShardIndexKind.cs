namespace VectorKit.Orleans;

/// <summary>The index kind each shard of a collection builds when it starts empty.</summary>
/// <remarks>
/// Other kinds (the inverted file, 8-bit encodings that need training) plug in through an
/// <see cref="IEmptyShardBuilder"/> of one's own; a shard loaded from a saved file keeps whatever kind the file holds.
/// </remarks>
[GenerateSerializer]
public enum ShardIndexKind
{
    /// <summary>The exact (brute-force) index: sharded answers equal a single exact index's.</summary>
    Exact = 0,

    /// <summary>The graph index (HNSW) with the collection's links per node and widths.</summary>
    Graph = 1,
}
