namespace VectorKit.Orleans;

/// <summary>
/// The stateless scatter–gather router (a stateless worker: one or more per silo, called locally): sends a search
/// to every shard a filter allows, one live copy each, and merges the per-shard top k into the global top k.
/// Use key 0.
/// </summary>
public interface IShardRouterGrain : IGrainWithIntegerKey
{
    /// <summary>Records a collection's definition in the store (idempotent for an equal definition).</summary>
    /// <param name="definition">The definition.</param>
    /// <returns><see langword="true"/> when created now.</returns>
    Task<bool> CreateCollectionAsync(ShardedCollectionDefinition definition);

    /// <summary>Reads a collection's definition.</summary>
    /// <param name="name">The name.</param>
    /// <returns>The definition, or <see langword="null"/>.</returns>
    Task<ShardedCollectionDefinition?> GetCollectionAsync(string name);

    /// <summary>Searches a collection.</summary>
    /// <param name="collection">The collection name.</param>
    /// <param name="search">The queries and settings.</param>
    /// <param name="cancellationToken">Cancels the search on every shard.</param>
    /// <returns>The merged hits.</returns>
    Task<RoutedSearchResult> SearchAsync(string collection, RoutedSearch search, CancellationToken cancellationToken = default);
}
