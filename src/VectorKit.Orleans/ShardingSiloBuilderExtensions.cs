using Microsoft.Extensions.DependencyInjection;
using Microsoft.Extensions.DependencyInjection.Extensions;

namespace VectorKit.Orleans;

/// <summary>Registers the sharding package on a silo.</summary>
public static class ShardingSiloBuilderExtensions
{
    /// <summary>
    /// Adds the shard and router grains' services: the store every silo shares, the default index factory (exact or
    /// graph; register an <see cref="IEmptyShardBuilder"/> first to use another), the copy placement and options.
    /// </summary>
    /// <param name="builder">The silo builder.</param>
    /// <param name="store">The shared store (the same location on every silo).</param>
    /// <param name="configure">Optional settings.</param>
    /// <returns>The builder.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="builder"/> or <paramref name="store"/> is null.</exception>
    public static ISiloBuilder AddVectorKitSharding(this ISiloBuilder builder, IShardStore store, Action<VectorKitShardingOptions>? configure = null)
    {
        ArgumentNullException.ThrowIfNull(builder);
        ArgumentNullException.ThrowIfNull(store);
        builder.Services.AddSingleton(store);
        builder.Services.TryAddSingleton<IEmptyShardBuilder, StandardEmptyShardBuilder>();
        builder.Services.AddSingleton<CollectionDefinitions>();
        builder.Services.AddOptions<VectorKitShardingOptions>().Configure(o => configure?.Invoke(o));
        builder.Services.AddPlacementDirector<ShardCopyPlacementStrategy, ShardCopyPlacementDirector>();
        return builder;
    }
}
