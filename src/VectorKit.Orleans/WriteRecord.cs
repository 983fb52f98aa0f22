namespace VectorKit.Orleans;

/// <summary>What a logged write does.</summary>
[GenerateSerializer]
public enum WriteKind : byte
{
    /// <summary>Adds the items, replacing those that exist.</summary>
    Upsert = 1,

    /// <summary>Removes the items that exist.</summary>
    Remove = 2,
}

/// <summary>One acknowledged write to one shard: what its primary logs and forwards to the replicas.</summary>
/// <param name="Sequence">The shard's log sequence number, 1, 2, 3, ... without gaps.</param>
/// <param name="Kind">Upsert or remove.</param>
/// <param name="Ids">The item ids, distinct, all owned by the shard.</param>
/// <param name="Vectors">For an upsert, the vectors row by row (ids.Length × dimension); empty for a remove.</param>
[GenerateSerializer]
[Immutable]
public sealed record WriteRecord(
    [property: Id(0)] long Sequence,
    [property: Id(1)] WriteKind Kind,
    [property: Id(2)] long[] Ids,
    [property: Id(3)] float[] Vectors);
