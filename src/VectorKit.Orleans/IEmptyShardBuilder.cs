using VectorKit.Indexes;

namespace VectorKit.Orleans;

/// <summary>Creates the empty index of a shard that has no snapshot yet. Register your own to use another kind.</summary>
/// <remarks>Called on the silo that activates the shard, once per activation, from the shard's own turn.</remarks>
public interface IEmptyShardBuilder
{
    /// <summary>Creates an empty index ready for writes (trained, when its kind needs training).</summary>
    /// <param name="definition">The collection.</param>
    /// <param name="shard">The shard number.</param>
    /// <returns>A new index with the collection's dimension and metric.</returns>
    IVectorIndex Create(ShardedCollectionDefinition definition, int shard);
}
