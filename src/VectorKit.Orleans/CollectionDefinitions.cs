using System.Collections.Concurrent;

namespace VectorKit.Orleans;

/// <summary>A silo's cache of collection definitions (they never change once created).</summary>
internal sealed class CollectionDefinitions(IShardStore store)
{
    private readonly ConcurrentDictionary<string, ShardedCollectionDefinition> _known = new(StringComparer.Ordinal);

    public IShardStore Store => store;

    public async Task<ShardedCollectionDefinition?> GetAsync(string name, CancellationToken cancellationToken = default)
    {
        if (_known.TryGetValue(name, out ShardedCollectionDefinition? d))
        {
            return d;
        }

        d = await store.LoadCollectionAsync(name, cancellationToken);
        if (d is not null)
        {
            _known[name] = d;
        }

        return d;
    }
}
