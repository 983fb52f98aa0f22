using VectorKit.Distance;
using VectorKit.Indexes.Exact;
using VectorKit.Persistence;

namespace VectorKit.Orleans.Tests;

public sealed class LocalDirectoryShardStoreTests : IDisposable
{
    private readonly string _root = Path.Combine(Path.GetTempPath(), "vectorkit-store-" + Guid.NewGuid().ToString("N"));

    public void Dispose() => Directory.Delete(_root, recursive: true);

    [Fact]
    public async Task A_definition_round_trips_and_a_different_one_under_the_same_name_is_refused()
    {
        var store = new LocalDirectoryShardStore(_root);
        var definition = new ShardedCollectionDefinition
        {
            Name = "tents", Dimension = 12, Metric = DistanceMetric.Cosine, ShardCount = 5, ReplicaCount = 3,
            IndexKind = ShardIndexKind.Graph, GraphLinksPerNode = 12, GraphSearchWidth = 80, SnapshotEveryWrites = 9,
        };
        Assert.True(await store.CreateCollectionAsync(definition));
        Assert.False(await store.CreateCollectionAsync(definition));
        Assert.Equal(definition, await new LocalDirectoryShardStore(_root).LoadCollectionAsync("tents"));
        Assert.Null(await store.LoadCollectionAsync("stoves"));
        var e = await Assert.ThrowsAsync<InvalidOperationException>(() => store.CreateCollectionAsync(definition with { ShardCount = 6 }));
        Assert.Contains("exists with a different definition", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public async Task The_newest_snapshot_wins_and_older_ones_are_removed()
    {
        var store = new LocalDirectoryShardStore(_root);
        foreach (long sequence in new long[] { 3, 17 })
        {
            using var index = new ExactIndex(2, DistanceMetric.SquaredEuclidean);
            index.Add(sequence, [1f, 2f]);
            await store.SaveSnapshotAsync("kayaks", 1, index, sequence);
        }

        (Indexes.IVectorIndex loaded, long seq) = (await store.LoadSnapshotAsync("kayaks", 1))!.Value;
        using (loaded)
        {
            Assert.Equal(17, seq);
            Assert.True(loaded.Contains(17));
        }

        Assert.Single(Directory.GetFiles(Path.Combine(_root, "kayaks"), "shard-0001-*"));
        Assert.Null(await store.LoadSnapshotAsync("kayaks", 0));
    }

    [Fact]
    [Trait("CWE", "354")]
    public async Task A_damaged_snapshot_surfaces_as_an_index_file_exception()
    {
        var store = new LocalDirectoryShardStore(_root);
        using (var index = new ExactIndex(2, DistanceMetric.SquaredEuclidean))
        {
            index.Add(1, [1f, 2f]);
            await store.SaveSnapshotAsync("skis", 0, index, 1);
        }

        string path = store.SnapshotPath("skis", 0)!;
        byte[] bytes = File.ReadAllBytes(path);
        bytes[^12] ^= 0x10;
        File.WriteAllBytes(path, bytes);
        await Assert.ThrowsAsync<IndexFileException>(() => store.LoadSnapshotAsync("skis", 0));
    }

    [Fact]
    public async Task Log_appends_accumulate_and_replace_cuts()
    {
        var store = new LocalDirectoryShardStore(_root);
        Assert.Empty(await store.ReadLogAsync("stoves", 2));
        await store.AppendLogAsync("stoves", 2, new byte[] { 1, 2 });
        await store.AppendLogAsync("stoves", 2, new byte[] { 3 });
        Assert.Equal([1, 2, 3], await store.ReadLogAsync("stoves", 2));
        await store.ReplaceLogAsync("stoves", 2, new byte[] { 9 });
        Assert.Equal([9], await store.ReadLogAsync("stoves", 2));
    }
}
