using System.Diagnostics;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using Xunit.Abstractions;

namespace VectorKit.Orleans.Tests;

/// <summary>
/// 4 silos, S = 8, R = 2, 10^5 items of dimension 16: exact shards answer as one exact index; graph shards' merged
/// recall@10 is within 0.01 of one graph's at the same width. The graph part uses 20,000 items by default (building
/// 16 graph copies plus the reference graph of 10^5 items takes minutes on a shared 2-core machine);
/// <c>VECTORKIT_ORLEANS_FULL=1</c> (scripts/orleans-full.sh) runs it at 10^5 too.
/// </summary>
public sealed class ScaleTests(ITestOutputHelper output)
{
    private const int Dimension = 16;
    private const int Queries = 200;

    private const int Items = 100_000;

    private static int GraphItems => Environment.GetEnvironmentVariable("VECTORKIT_ORLEANS_FULL") == "1" ? Items : 20_000;

    [Fact]
    public async Task Four_silos_eight_shards_two_copies_exact_and_graph()
    {
        int n = Items;
        long[] ids = Reference.Ids(n, 1);
        float[] vectors = Reference.Random(n, Dimension, 2);
        float[] queries = Reference.Random(Queries, Dimension, 3);
        using ExactIndex single = Reference.Single(ids, vectors, Dimension);
        BatchSearchResults truth = single.SearchBatch(queries, 10);
        output.WriteLine($"{n} items, graph part {GraphItems}");

        await using ShardCluster cluster = await ShardCluster.StartAsync(4);
        var clock = Stopwatch.StartNew();
        ShardedVectorCollection exact = await cluster.CreateAsync(new ShardedCollectionDefinition { Name = "scale-exact", Dimension = Dimension });
        await UpsertInBatchesAsync(exact, ids, vectors);
        output.WriteLine($"exact: {n} items written in {clock.Elapsed.TotalSeconds:F1} s");
        Assert.Equal(n, await exact.CountAsync());
        RoutedSearchResult exactAnswer = await exact.SearchBatchAsync(queries, Queries, 10);
        for (int q = 0; q < Queries; q++)
        {
            Reference.Equal(truth[q], exactAnswer.Hits[q], $"query {q}");
        }

        // Copies sit on different silos.
        ShardStatus[] status = await exact.GetStatusAsync(TimeSpan.FromSeconds(10));
        Assert.All(status.GroupBy(s => s.Shard), g => Assert.Equal(2, g.Select(s => s.Silo).Distinct().Count()));

        clock.Restart();
        ShardedVectorCollection graph = await cluster.CreateAsync(new ShardedCollectionDefinition { Name = "scale-graph", Dimension = Dimension, IndexKind = ShardIndexKind.Graph });
        int g = GraphItems;
        long[] graphIds = ids[..g];
        float[] graphVectors = vectors[..(g * Dimension)];
        await UpsertInBatchesAsync(graph, graphIds, graphVectors, batch: 2_000); // short calls: each graph insert is one grain turn
        output.WriteLine($"graph: {g} items written in {clock.Elapsed.TotalSeconds:F1} s");
        RoutedSearchResult graphAnswer = await graph.SearchBatchAsync(queries, Queries, 10);

        using var singleGraph = new GraphIndex(Dimension, Distance.DistanceMetric.SquaredEuclidean, StandardEmptyShardBuilder.GraphOptions(graph.Definition));
        singleGraph.AddRange(graphIds, graphVectors);
        if (g < n)
        {
            using ExactIndex graphTruthIndex = Reference.Single(graphIds, graphVectors, Dimension);
            truth = graphTruthIndex.SearchBatch(queries, 10);
        }

        BatchSearchResults singleAnswer = singleGraph.SearchBatch(queries, 10);
        double sharded = Recall(truth, q => graphAnswer.Hits[q]);
        double one = Recall(truth, q => singleAnswer[q].ToArray());
        output.WriteLine($"recall@10: sharded graph {sharded:F4}, single graph {one:F4} (width {singleGraph.Options.SearchWidth})");
        Assert.True(sharded >= one - 0.01, $"sharded recall {sharded:F4} < single {one:F4} - 0.01");
    }

    internal static async Task UpsertInBatchesAsync(ShardedVectorCollection collection, long[] ids, float[] vectors, int batch = 10_000)
    {
        int d = collection.Definition.Dimension;
        for (int start = 0; start < ids.Length; start += batch)
        {
            int count = Math.Min(batch, ids.Length - start);
            await collection.UpsertAsync(ids.AsMemory(start, count), vectors.AsMemory(start * d, count * d));
        }
    }

    private static double Recall(BatchSearchResults truth, Func<int, SearchHit[]> found)
    {
        double total = 0;
        for (int q = 0; q < truth.QueryCount; q++)
        {
            var expected = new HashSet<long>();
            foreach (SearchHit h in truth[q])
            {
                expected.Add(h.Id);
            }

            total += found(q).Count(h => expected.Contains(h.Id)) / (double)expected.Count;
        }

        return total / truth.QueryCount;
    }
}
