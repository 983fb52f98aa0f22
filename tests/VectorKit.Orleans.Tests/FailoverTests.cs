using System.Collections.Concurrent;
using Orleans.TestingHost;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using Xunit.Abstractions;

namespace VectorKit.Orleans.Tests;

/// <summary>
/// Kills silos during a stream of writes and searches (4 silos, S = 8, R = 2): every acknowledged write is present
/// afterwards, no write or search fails (each retries within <see cref="ShardCluster.ClientOptions"/>' window), and
/// the answers equal a single exact index over the acknowledged items again once re-activation finishes.
/// </summary>
public sealed class FailoverTests(ITestOutputHelper output)
{
    private const int Dimension = 8;
    private const int IdSpace = 4000;

    [Theory]
    [InlineData(1)]
    [InlineData(2)]
    public async Task Acknowledged_writes_survive_killed_silos_hosting_several_primaries(int kills)
    {
        await using ShardCluster cluster = await ShardCluster.StartAsync(4);
        ShardedVectorCollection collection = await cluster.CreateAsync(new ShardedCollectionDefinition
        {
            Name = "failover",
            Dimension = Dimension,
            SnapshotEveryWrites = 16, // snapshots and log truncation happen during the stream too
        });

        // The model: the last acknowledged vector of every id (each writer owns the ids of its residue, so
        // acknowledgements of one id are ordered).
        var acknowledged = new ConcurrentDictionary<long, float[]>();
        long[] preload = [.. Enumerable.Range(0, 1000).Select(i => (long)i)];
        float[] preloadVectors = Reference.Random(preload.Length, Dimension, 5);
        await collection.UpsertAsync(preload, preloadVectors);
        for (int i = 0; i < preload.Length; i++)
        {
            acknowledged[preload[i]] = preloadVectors.AsSpan(i * Dimension, Dimension).ToArray();
        }

        using var stop = new CancellationTokenSource();
        var failures = new ConcurrentQueue<string>();
        int writes = 0, searches = 0;
        Task[] writers = [.. Enumerable.Range(0, 2).Select(w => Task.Run(async () =>
        {
            var random = new Random(100 + w);
            while (!stop.IsCancellationRequested)
            {
                long[] ids = [.. Enumerable.Range(0, 12).Select(_ => (long)((random.Next(IdSpace / 2) * 2) + w)).Distinct()];
                float[] vectors = Reference.Random(ids.Length, Dimension, random.Next());
                try
                {
                    await collection.UpsertAsync(ids, vectors);
                    for (int i = 0; i < ids.Length; i++)
                    {
                        acknowledged[ids[i]] = vectors.AsSpan(i * Dimension, Dimension).ToArray();
                    }

                    Interlocked.Increment(ref writes);
                }
                catch (Exception e)
                {
                    failures.Enqueue($"write: {e.GetType().Name}: {e.Message}");
                }
            }
        }))];
        Task searcher = Task.Run(async () =>
        {
            var random = new Random(7);
            while (!stop.IsCancellationRequested)
            {
                try
                {
                    (SearchHit[] hits, RoutedSearchResult result) = await collection.SearchAsync(Reference.Random(1, Dimension, random.Next()), 10);
                    if (result.IsPartial || hits.Length != 10)
                    {
                        failures.Enqueue($"search: partial {result.IsPartial}, {hits.Length} hits");
                    }

                    Interlocked.Increment(ref searches);
                }
                catch (Exception e)
                {
                    failures.Enqueue($"search: {e.GetType().Name}: {e.Message}");
                }
            }
        });

        var killed = new List<string>();
        for (int k = 0; k < kills; k++)
        {
            await WaitForProgressAsync(() => writes, 20);
            InProcessSiloHandle victim = await SiloWithMostPrimariesAsync(cluster, collection);
            killed.Add(victim.SiloAddress.ToString());
            await cluster.Cluster.KillSiloAsync(victim);
            int writesAtKill = writes;
            output.WriteLine($"killed {victim.SiloAddress} after {writesAtKill} writes, {searches} searches");

            // Keep the stream going until writes have gone through again on the survivors.
            await WaitForProgressAsync(() => writes - writesAtKill, 30);
        }

        await stop.CancelAsync();
        await Task.WhenAll([.. writers, searcher]);
        output.WriteLine($"{writes} writes and {searches} searches acknowledged; failures: {failures.Count}");
        Assert.True(failures.IsEmpty, string.Join("\n", failures.Take(10)));

        // Every acknowledged write is there, with its last acknowledged value.
        Assert.Equal(acknowledged.Count, await collection.CountAsync());
        foreach ((long id, float[] vector) in acknowledged)
        {
            Assert.Equal(vector, await collection.GetVectorAsync(id));
        }

        // Answers equal the single exact index again (every replica serves: the rotation reaches each copy).
        long[] ids = [.. acknowledged.Keys];
        using ExactIndex single = Reference.Single(ids, [.. ids.SelectMany(i => acknowledged[i])], Dimension);
        float[] queries = Reference.Random(40, Dimension, 99);
        for (int round = 0; round < 2; round++)
        {
            RoutedSearchResult answer = await collection.SearchBatchAsync(queries, 40, 10);
            for (int q = 0; q < 40; q++)
            {
                Reference.Equal(single.Search(queries.AsSpan(q * Dimension, Dimension), 10), answer.Hits[q], $"round {round}, query {q}");
            }
        }

        ShardStatus[] status = await collection.GetStatusAsync(TimeSpan.FromSeconds(30));
        Assert.All(status, s => Assert.True(s.Available, s.Problem));
        Assert.All(status, s => Assert.DoesNotContain(s.Silo, killed));
    }

    private static async Task WaitForProgressAsync(Func<int> progress, int target)
    {
        for (int i = 0; i < 1200 && progress() < target; i++)
        {
            await Task.Delay(100);
        }

        Assert.True(progress() >= target, $"the stream made {progress()} of {target} writes in 120 s");
    }

    // The silo hosting the most shard primaries, never the first silo (it hosts the test cluster's membership).
    private static async Task<InProcessSiloHandle> SiloWithMostPrimariesAsync(ShardCluster cluster, ShardedVectorCollection collection)
    {
        ShardStatus[] status = await collection.GetStatusAsync(TimeSpan.FromSeconds(30));
        InProcessSiloHandle[] candidates = [.. cluster.Cluster.GetActiveSilos().Skip(1)];
        InProcessSiloHandle victim = candidates.MaxBy(h => status.Count(s => s.Replica == 0 && s.Silo == h.SiloAddress.ToString()))!;
        int primaries = status.Count(s => s.Replica == 0 && s.Silo == victim.SiloAddress.ToString());
        Assert.True(primaries >= 2, $"the chosen silo hosts {primaries} primaries; statuses: {string.Join(", ", status.Select(s => s.Silo))}");
        return victim;
    }
}
