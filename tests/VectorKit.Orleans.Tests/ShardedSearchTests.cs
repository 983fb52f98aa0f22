using FsCheck;
using FsCheck.Fluent;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;

namespace VectorKit.Orleans.Tests;

[Collection("cluster")]
public sealed class ShardedSearchTests(ClusterFixture fixture)
{
    private static int s_collections;

    private ShardCluster Cluster => fixture.Cluster;

    private static string NewName(string stem) => $"{stem}-{Interlocked.Increment(ref s_collections)}";

    private static ShardedCollectionDefinition Exact(string name, int dimension, int shards = 8, int replicas = 2) => new()
    {
        Name = name,
        Dimension = dimension,
        ShardCount = shards,
        ReplicaCount = replicas,
    };

    [Fact]
    public void Merged_top_k_equals_a_single_exact_index_including_ties()
    {
        // Integer coordinates from a few levels make many equal distances: the merge must break them by id as one
        // index does. Shard counts 1 to 8, replicas 1 or 2, k up to past the item count.
        Gen<(int Items, int Dimension, int Levels, int Shards, int Replicas, int K, int Seed)> cases =
            from items in Gen.Choose(0, 300)
            from dimension in Gen.Choose(1, 6)
            from levels in Gen.Choose(2, 4)
            from shards in Gen.Choose(1, 8)
            from replicas in Gen.Choose(1, 2)
            from k in Gen.Choose(1, 40)
            from seed in Gen.Choose(0, int.MaxValue)
            select (items, dimension, levels, shards, replicas, k, seed);

        Check.One(Config.QuickThrowOnFailure.WithMaxTest(25), Prop.ForAll(cases.ToArbitrary(), c =>
        {
            long[] ids = Reference.Ids(c.Items, c.Seed);
            float[] vectors = Reference.Random(c.Items, c.Dimension, c.Seed, c.Levels);
            using ExactIndex single = Reference.Single(ids, vectors, c.Dimension);
            ShardedVectorCollection sharded = Cluster.CreateAsync(Exact(NewName("prop"), c.Dimension, c.Shards, c.Replicas)).GetAwaiter().GetResult();
            if (c.Items > 0)
            {
                sharded.UpsertAsync(ids, vectors).GetAwaiter().GetResult();
            }

            float[] queries = Reference.Random(5, c.Dimension, c.Seed + 1, c.Levels);
            RoutedSearchResult batch = sharded.SearchBatchAsync(queries, 5, c.K).GetAwaiter().GetResult();
            Assert.False(batch.IsPartial);
            for (int q = 0; q < 5; q++)
            {
                SearchHit[] expected = single.Search(queries.AsSpan(q * c.Dimension, c.Dimension), c.K);
                Reference.Equal(expected, batch.Hits[q], $"case {c}, query {q}");
            }
        }));
    }

    [Fact]
    public async Task Filters_match_the_single_index_with_the_same_predicate_and_only_lists_reach_their_shards()
    {
        const int n = 2000, d = 8;
        long[] ids = [.. Enumerable.Range(0, n).Select(i => (long)i)];
        float[] vectors = Reference.Random(n, d, 7);
        using ExactIndex single = Reference.Single(ids, vectors, d);
        ShardedVectorCollection sharded = await Cluster.CreateAsync(Exact(NewName("filter"), d));
        await sharded.UpsertAsync(ids, vectors);
        float[] query = Reference.Random(1, d, 8);
        IdFilter[] filters =
        [
            new(From: 100, To: 499),
            new(Except: [.. ids.Where(i => i % 3 == 0)]),
            new(Only: [5, 17, 1999, 777, 4242]),
            new(Only: [.. ids.Where(i => i % 7 == 0)], Except: [14, 21], From: 50),
        ];
        foreach (IdFilter filter in filters)
        {
            // The reference predicate is written out here, independently of IdFilter.ToPredicate.
            bool Passes(long id) => (filter.Only is null || filter.Only.Contains(id)) && (filter.Except is null || !filter.Except.Contains(id))
                && (filter.From is null || id >= filter.From) && (filter.To is null || id <= filter.To);
            SearchHit[] expected = single.Search(query, 20, new SearchOptions { Filter = Passes });
            (SearchHit[] actual, RoutedSearchResult result) = await sharded.SearchAsync(query, 20, new ShardedSearchOptions { Filter = filter });
            Assert.False(result.IsPartial);
            Reference.Equal(expected, actual, $"filter {filter}");
        }

        Assert.Equal([ShardHash.ShardOf(5, 8)], new IdFilter(Only: [5]).Shards(8));
    }

    [Fact]
    public async Task Bad_input_at_the_edge_is_refused_before_anything_is_written()
    {
        ShardedVectorCollection sharded = await Cluster.CreateAsync(Exact(NewName("bad"), 4));
        await sharded.UpsertAsync(new long[] { 1, 2 }, new float[8]);

        var wrongDimension = await Assert.ThrowsAsync<ArgumentException>(() => sharded.UpsertAsync(new long[] { 3, 4 }, new float[6]));
        Assert.Contains("Expected 2 rows of dimension 4 (8 floats); got 6 floats", wrongDimension.Message, StringComparison.Ordinal);
        float[] withNaN = new float[8];
        withNaN[5] = float.NaN;
        var notFinite = await Assert.ThrowsAsync<ArgumentException>(() => sharded.UpsertAsync(new long[] { 3, 4 }, withNaN));
        Assert.Contains("Row 1, element 1 is NaN", notFinite.Message, StringComparison.Ordinal);

        // Ids 3 and 3 would land on one shard; 10 and 10 in a batch whose other ids span every shard likewise: the
        // whole batch is refused, no shard gets its part.
        long[] spread = [.. Enumerable.Range(10, 40).Select(i => (long)i), 10];
        var duplicate = await Assert.ThrowsAsync<ArgumentException>(() => sharded.UpsertAsync(spread, new float[spread.Length * 4]));
        Assert.Contains("Id 10 appears more than once", duplicate.Message, StringComparison.Ordinal);
        Assert.Equal(2, await sharded.CountAsync());

        await Assert.ThrowsAsync<ArgumentException>(() => sharded.SearchAsync(new float[3], 5));
        await Assert.ThrowsAsync<ArgumentOutOfRangeException>(() => sharded.SearchAsync(new float[4], 0));
        await Assert.ThrowsAsync<ArgumentOutOfRangeException>(() => sharded.SearchAsync(new float[4], 5000));
        await Assert.ThrowsAsync<ArgumentException>(() => sharded.SearchAsync(new float[4], 5, new ShardedSearchOptions { Filter = new IdFilter(From: 9, To: 1) }));

        // The router checks too, for callers that skip the client class.
        IShardRouterGrain router = Cluster.Grains.GetGrain<IShardRouterGrain>(0);
        var routed = await Assert.ThrowsAsync<ArgumentException>(() => router.SearchAsync(sharded.Definition.Name, new RoutedSearch { Queries = new float[3], QueryCount = 1, K = 5 }));
        Assert.Contains("Expected 1 rows of dimension 4", routed.Message, StringComparison.Ordinal);
        float[] infinite = [1, 2, float.PositiveInfinity, 4];
        await Assert.ThrowsAsync<ArgumentException>(() => router.SearchAsync(sharded.Definition.Name, new RoutedSearch { Queries = infinite, QueryCount = 1, K = 5 }));
        await Assert.ThrowsAsync<ArgumentException>(() => router.SearchAsync("no-such-collection", new RoutedSearch { Queries = new float[4], QueryCount = 1, K = 5 }));

        // A shard grain refuses an id another shard owns, even when called directly.
        long foreign = Enumerable.Range(0, 100).First(i => ShardHash.ShardOf(i, 8) != 0);
        IShardGrain shard0 = Cluster.Grains.GetGrain<IShardGrain>(ShardKey.Format(sharded.Definition.Name, 0, 0));
        var e = await Assert.ThrowsAsync<ArgumentException>(() => shard0.UpsertAsync([foreign], new float[4]));
        Assert.Contains($"belongs to shard {ShardHash.ShardOf(foreign, 8)}, not shard 0", e.Message, StringComparison.Ordinal);
        Assert.Equal(2, await sharded.CountAsync());

        // A second definition under the same name is refused.
        await Assert.ThrowsAsync<InvalidOperationException>(() => Cluster.CreateAsync(Exact(sharded.Definition.Name, 5)));
    }

    [Fact]
    [Trait("CWE", "354")]
    public async Task A_shard_whose_snapshot_fails_its_checksum_reports_unavailable_and_the_others_keep_serving()
    {
        const int n = 1500, d = 8;
        long[] ids = [.. Enumerable.Range(0, n).Select(i => (long)i * 3)];
        float[] vectors = Reference.Random(n, d, 11);
        ShardedVectorCollection sharded = await Cluster.CreateAsync(Exact(NewName("damaged"), d) with { SnapshotEveryWrites = 1 });
        await sharded.UpsertAsync(ids, vectors);
        const int broken = 3;
        string path = Cluster.Store.SnapshotPath(sharded.Definition.Name, broken)!;
        Assert.NotNull(path);
        byte[] bytes = File.ReadAllBytes(path);
        bytes[^20] ^= 0x40;
        File.WriteAllBytes(path, bytes);
        await sharded.ResetShardAsync(broken);
        await WaitUnavailableAsync(sharded, broken);

        float[] query = Reference.Random(1, d, 12);
        var unavailable = await Assert.ThrowsAsync<ShardUnavailableException>(() => sharded.SearchAsync(query, 10));
        Assert.Equal([broken], unavailable.Shards);
        Assert.False(unavailable.IsTransient);
        Assert.Contains("checksum", unavailable.Message, StringComparison.OrdinalIgnoreCase);

        // Partial on request: flagged, the missing shard named, and exactly the single index over the other shards.
        (SearchHit[] partial, RoutedSearchResult result) = await sharded.SearchAsync(query, 10, new ShardedSearchOptions { AllowPartial = true });
        Assert.True(result.IsPartial);
        Assert.Equal([broken], result.MissingShards);
        long[] kept = [.. ids.Where(i => ShardHash.ShardOf(i, 8) != broken)];
        using ExactIndex others = Reference.Single(kept, [.. kept.SelectMany(i => vectors.AsSpan((int)(i / 3) * d, d).ToArray())], d);
        Reference.Equal(others.Search(query, 10), partial, "partial answer");

        // Writes to the damaged shard fail loudly; writes to the others go on.
        long toBroken = Enumerable.Range(0, 1000).Select(i => (long)i * 3 + 1).First(i => ShardHash.ShardOf(i, 8) == broken);
        long toOther = Enumerable.Range(0, 1000).Select(i => (long)i * 3 + 1).First(i => ShardHash.ShardOf(i, 8) != broken);
        await Assert.ThrowsAsync<ShardUnavailableException>(() => sharded.UpsertAsync(new[] { toBroken }, new float[d]));
        await sharded.UpsertAsync(new[] { toOther }, new float[d]);
        ShardStatus[] status = await sharded.GetStatusAsync(TimeSpan.FromSeconds(5));
        Assert.All(status.Where(s => s.Shard == broken), s => Assert.False(s.Available));
        Assert.All(status.Where(s => s.Shard != broken), s => Assert.True(s.Available, s.Problem));
    }

    [Fact]
    public async Task A_shard_file_holding_another_shards_id_is_refused_as_a_duplicate_across_shards()
    {
        const int d = 4;
        ShardedVectorCollection sharded = await Cluster.CreateAsync(Exact(NewName("foreign"), d));
        long own = Enumerable.Range(0, 100).First(i => ShardHash.ShardOf(i, 8) == 2);
        long foreign = Enumerable.Range(0, 100).First(i => ShardHash.ShardOf(i, 8) == 5);
        await sharded.UpsertAsync(new[] { foreign }, new float[d]);

        // Plant a snapshot in shard 2 that also holds an id of shard 5, as a misplaced file would.
        using (var planted = new ExactIndex(d, Distance.DistanceMetric.SquaredEuclidean))
        {
            planted.Add(own, new float[d]);
            planted.Add(foreign, new float[d]);
            await Cluster.Store.SaveSnapshotAsync(sharded.Definition.Name, 2, planted, 0);
        }

        await sharded.ResetShardAsync(2);
        await WaitUnavailableAsync(sharded, 2);
        var e = await Assert.ThrowsAsync<ShardUnavailableException>(() => sharded.SearchAsync(new float[d], 3));
        Assert.Equal([2], e.Shards);
        Assert.True(e.Message.Contains($"hold id {foreign}, which belongs to shard 5", StringComparison.Ordinal), e.Message);
    }

    // Deactivation after a reset is asynchronous: wait until every copy has re-activated from the damaged files.
    private static async Task WaitUnavailableAsync(ShardedVectorCollection sharded, int shard)
    {
        for (int attempt = 0; attempt < 100; attempt++)
        {
            ShardStatus[] status = await sharded.GetStatusAsync(TimeSpan.FromSeconds(5));
            if (status.Where(s => s.Shard == shard).All(s => !s.Available))
            {
                return;
            }

            await Task.Delay(100);
        }

        Assert.Fail($"shard {shard} did not become unavailable");
    }

    [Fact]
    public async Task Cancellation_and_timeouts()
    {
        ShardedVectorCollection sharded = await Cluster.CreateAsync(Exact(NewName("cancel"), 4));
        await sharded.UpsertAsync(new long[] { 1, 2, 3 }, new float[12]);
        using var cancelled = new CancellationTokenSource();
        await cancelled.CancelAsync();
        await Assert.ThrowsAnyAsync<OperationCanceledException>(() => sharded.SearchAsync(new float[4], 2, cancellationToken: cancelled.Token));
        await Assert.ThrowsAnyAsync<OperationCanceledException>(() => sharded.UpsertAsync(new long[] { 9 }, new float[4], cancelled.Token));

        // No shard can answer within one tick: with partial results allowed the answer is flagged and names them all.
        (SearchHit[] hits, RoutedSearchResult result) = await sharded.SearchAsync(new float[4], 2, new ShardedSearchOptions { Timeout = TimeSpan.FromTicks(1), AllowPartial = true });
        Assert.True(result.IsPartial);
        Assert.Empty(hits);
        Assert.Equal(8, result.MissingShards.Length);
    }
}

[CollectionDefinition("cluster")]
public sealed class ClusterCollection : ICollectionFixture<ClusterFixture>
{
}
