using VectorKit.Indexes;

namespace VectorKit.Orleans.Tests;

/// <summary>A log append that fails: the write is not acknowledged and its change, already in the primary's index, is never served.</summary>
public sealed class FailedAppendTests
{
    private sealed class FailingAppends(string root) : IShardStore
    {
        public static int Remaining;
        private readonly LocalDirectoryShardStore _inner = new(root);

        public Task AppendLogAsync(string collection, int shard, ReadOnlyMemory<byte> records, CancellationToken cancellationToken = default)
            => Interlocked.Decrement(ref Remaining) >= 0
                ? throw new IOException("No space left on device (simulated).")
                : _inner.AppendLogAsync(collection, shard, records, cancellationToken);

        public Task<bool> CreateCollectionAsync(ShardedCollectionDefinition definition, CancellationToken cancellationToken = default) => _inner.CreateCollectionAsync(definition, cancellationToken);

        public Task<ShardedCollectionDefinition?> LoadCollectionAsync(string name, CancellationToken cancellationToken = default) => _inner.LoadCollectionAsync(name, cancellationToken);

        public Task<(IVectorIndex Index, long Sequence)?> LoadSnapshotAsync(string collection, int shard, CancellationToken cancellationToken = default) => _inner.LoadSnapshotAsync(collection, shard, cancellationToken);

        public Task<byte[]> ReadLogAsync(string collection, int shard, CancellationToken cancellationToken = default) => _inner.ReadLogAsync(collection, shard, cancellationToken);

        public Task ReplaceLogAsync(string collection, int shard, ReadOnlyMemory<byte> records, CancellationToken cancellationToken = default) => _inner.ReplaceLogAsync(collection, shard, records, cancellationToken);

        public Task SaveSnapshotAsync(string collection, int shard, IVectorIndex index, long sequence, CancellationToken cancellationToken = default) => _inner.SaveSnapshotAsync(collection, shard, index, sequence, cancellationToken);
    }

    [Fact]
    public async Task An_unlogged_write_is_retried_into_the_log_or_refused_and_never_served()
    {
        await using ShardCluster cluster = await ShardCluster.StartAsync(1, root => new FailingAppends(root));
        var definition = new ShardedCollectionDefinition { Name = "appends", Dimension = 2, ShardCount = 1, ReplicaCount = 1 };
        ShardedVectorCollection collection = await ShardedVectorCollection.CreateAsync(cluster.Grains, definition, new ShardedCollectionClientOptions { RetryWindow = TimeSpan.FromSeconds(3) });
        await collection.UpsertAsync(new long[] { 1 }, new float[] { 1, 1 });

        // One failed append: the client's retry reaches a fresh activation, which logs the write once.
        FailingAppends.Remaining = 1;
        ShardWriteAck[] ack = await collection.UpsertAsync(new long[] { 2 }, new float[] { 2, 2 });
        Assert.Equal(2, ack[0].Sequence);
        Assert.Equal(2, await collection.CountAsync());

        // Appends that keep failing: the write is refused, and its change never becomes visible.
        FailingAppends.Remaining = int.MaxValue;
        // The last attempt meets either the failing append or the activation that is being dropped after one.
        Exception refused = await Assert.ThrowsAnyAsync<Exception>(() => collection.UpsertAsync(new long[] { 3 }, new float[] { 3, 3 }));
        Assert.True(refused is IOException or ShardUnavailableException { IsTransient: true }, refused.ToString());
        FailingAppends.Remaining = 0;
        Assert.Null(await collection.GetVectorAsync(3));
        (SearchHit[] hits, _) = await collection.SearchAsync(new float[] { 3, 3 }, 5);
        Assert.Equal([2L, 1L], hits.Select(h => h.Id));
        Assert.Equal(2, await collection.CountAsync());
    }
}
