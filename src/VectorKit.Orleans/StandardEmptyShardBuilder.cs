using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;

namespace VectorKit.Orleans;

/// <summary>Builds an exact or graph index from <see cref="ShardedCollectionDefinition.IndexKind"/>.</summary>
public sealed class StandardEmptyShardBuilder : IEmptyShardBuilder
{
    /// <inheritdoc />
    public IVectorIndex Create(ShardedCollectionDefinition definition, int shard)
    {
        ArgumentNullException.ThrowIfNull(definition);
        return definition.IndexKind switch
        {
            ShardIndexKind.Graph => new GraphIndex(definition.Dimension, definition.Metric, GraphOptions(definition)),
            _ => new ExactIndex(definition.Dimension, definition.Metric),
        };
    }

    internal static GraphIndexOptions GraphOptions(ShardedCollectionDefinition d)
    {
        var defaults = GraphIndexOptions.Default;
        return new GraphIndexOptions
        {
            LinksPerNode = d.GraphLinksPerNode ?? defaults.LinksPerNode,
            BuildWidth = d.GraphBuildWidth ?? defaults.BuildWidth,
            SearchWidth = d.GraphSearchWidth ?? defaults.SearchWidth,
            // One shard is one grain turn; the cluster's parallelism comes from many shards.
            MaxDegreeOfParallelism = 1,
        };
    }
}
