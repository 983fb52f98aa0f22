using Orleans.Placement;
using Orleans.Runtime;
using Orleans.Runtime.Placement;

namespace VectorKit.Orleans;

/// <summary>
/// Places copy <c>r</c> of shard <c>s</c> on silo <c>(s + r) mod n</c> of the <c>n</c> compatible silos ordered by
/// address: the copies of one shard land on different silos while <c>R ≤ n</c>, and primaries spread round the
/// cluster. After a silo dies, re-activated copies are placed by the same rule over the survivors, which may put two
/// copies of a shard on one silo until the cluster grows again (no copy is moved back automatically).
/// </summary>
[GenerateSerializer]
[Immutable]
[SuppressReferenceTracking]
public sealed class ShardCopyPlacementStrategy : PlacementStrategy
{
}

/// <summary>Marks a grain class for <see cref="ShardCopyPlacementStrategy"/>.</summary>
[AttributeUsage(AttributeTargets.Class, AllowMultiple = false)]
public sealed class ShardCopyPlacementAttribute : PlacementAttribute
{
    /// <summary>Creates the attribute.</summary>
    public ShardCopyPlacementAttribute()
        : base(new ShardCopyPlacementStrategy())
    {
    }
}

/// <summary>The placement director for <see cref="ShardCopyPlacementStrategy"/>.</summary>
internal sealed class ShardCopyPlacementDirector : IPlacementDirector
{
    public Task<SiloAddress> OnAddActivation(PlacementStrategy strategy, PlacementTarget target, IPlacementContext context)
    {
        SiloAddress[] silos = context.GetCompatibleSilos(target);
        if (silos.Length == 0)
        {
            throw new OrleansException($"No silo can host {target.GrainIdentity}.");
        }

        Array.Sort(silos, static (a, b) => string.CompareOrdinal(a.ToParsableString(), b.ToParsableString()));
        int slot = 0;
        if (ShardKey.TryParse(target.GrainIdentity.Key.ToString() ?? "", out _, out int shard, out int replica))
        {
            slot = (int)(((long)shard + replica) % silos.Length);
        }

        return Task.FromResult(silos[slot]);
    }
}
