using Orleans.Configuration;
using Orleans.Hosting;
using Orleans.TestingHost;
using VectorKit.Orleans;

namespace VectorKit.Orleans.Tests;

/// <summary>An in-process Orleans cluster on loopback with the sharding package and a store in a temporary folder.</summary>
internal sealed class ShardCluster : IAsyncDisposable
{
    private ShardCluster(InProcessTestCluster cluster, string root)
    {
        Cluster = cluster;
        Root = root;
        Store = new LocalDirectoryShardStore(root);
    }

    public InProcessTestCluster Cluster { get; }

    public string Root { get; }

    public LocalDirectoryShardStore Store { get; }

    public IGrainFactory Grains => Cluster.Client;

    /// <summary>Client retries long enough to cover failure detection with the membership settings below.</summary>
    public static ShardedCollectionClientOptions ClientOptions { get; } = new()
    {
        RetryWindow = TimeSpan.FromSeconds(60),
        AttemptTimeout = TimeSpan.FromSeconds(30),
    };

    public static async Task<ShardCluster> StartAsync(int silos, Func<string, IShardStore>? store = null)
    {
        string root = Path.Combine(Path.GetTempPath(), "vectorkit-orleans-" + Guid.NewGuid().ToString("N"));
        Directory.CreateDirectory(root);
        var builder = new InProcessTestClusterBuilder((short)silos);
        builder.ConfigureSilo((_, silo) =>
        {
            silo.AddVectorKitSharding(store?.Invoke(root) ?? new LocalDirectoryShardStore(root));

            // Detect a killed silo within a few seconds (the defaults take tens of seconds).
            silo.Configure<ClusterMembershipOptions>(o =>
            {
                o.ProbeTimeout = TimeSpan.FromMilliseconds(500);
                o.NumMissedProbesLimit = 2;
                o.NumVotesForDeathDeclaration = 1;
                o.TableRefreshTimeout = TimeSpan.FromSeconds(1);
                o.IAmAliveTablePublishTimeout = TimeSpan.FromSeconds(2);
            });
            silo.Configure<SiloMessagingOptions>(o => o.ResponseTimeout = TimeSpan.FromSeconds(30));
        });
        builder.ConfigureClient(client => client.Configure<ClientMessagingOptions>(o => o.ResponseTimeout = TimeSpan.FromSeconds(30)));
        InProcessTestCluster cluster = builder.Build();
        await cluster.DeployAsync();
        return new ShardCluster(cluster, root);
    }

    public Task<ShardedVectorCollection> CreateAsync(ShardedCollectionDefinition definition)
        => ShardedVectorCollection.CreateAsync(Grains, definition, ClientOptions);

    public async ValueTask DisposeAsync()
    {
        try
        {
            await Cluster.StopAllSilosAsync();
        }
        catch (Exception)
        {
            // A killed silo may fail to stop cleanly; the folder still goes.
        }

        await Cluster.DisposeAsync();
        try
        {
            Directory.Delete(Root, recursive: true);
        }
        catch (IOException)
        {
        }
    }
}

/// <summary>One three-silo cluster shared by a test class.</summary>
public sealed class ClusterFixture : IAsyncLifetime
{
    private ShardCluster? _cluster;

    internal ShardCluster Cluster => _cluster!;

    public async Task InitializeAsync() => _cluster = await ShardCluster.StartAsync(3);

    public async Task DisposeAsync() => await _cluster!.DisposeAsync();
}
