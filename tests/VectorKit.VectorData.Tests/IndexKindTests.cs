using Microsoft.Extensions.VectorData;

namespace VectorKit.VectorData.Tests;

/// <summary>Approximate kinds with filters, and records with more than one vector property.</summary>
public class IndexKindTests
{
    [Fact]
    public async Task A_filtered_graph_search_returns_top_passing_records_close_to_the_exact_answer()
    {
        using var store = new VectorKitStore();
        var definition = new VectorStoreCollectionDefinition
        {
            Properties =
            [
                new VectorStoreKeyProperty("Key", typeof(long)),
                new VectorStoreDataProperty("Bucket", typeof(int)) { IsIndexed = true },
                new VectorStoreVectorProperty("Graph", typeof(float[]), 16) { IndexKind = IndexKind.Hnsw },
                new VectorStoreVectorProperty("Exact", typeof(float[]), 16) { IndexKind = IndexKind.Flat },
            ],
        };
        var collection = store.GetDynamicCollection("multi", definition);
        await collection.EnsureCollectionExistsAsync();
        var random = new Random(9);
        await collection.UpsertAsync(Enumerable.Range(0, 2000).Select(i =>
        {
            float[] v = Enumerable.Range(0, 16).Select(_ => (float)random.NextDouble() - 0.5f).ToArray();
            return new Dictionary<string, object?> { ["Key"] = (long)i, ["Bucket"] = i % 10, ["Graph"] = v, ["Exact"] = v };
        }));

        int overlap = 0;
        for (int q = 0; q < 20; q++)
        {
            float[] query = Enumerable.Range(0, 16).Select(_ => (float)random.NextDouble() - 0.5f).ToArray();
            var graph = await collection.SearchAsync(query, 10, new VectorSearchOptions<Dictionary<string, object?>>
            {
                Filter = r => (int)r["Bucket"]! == 3,
                VectorProperty = r => r["Graph"],
            }).ToListAsync();
            var exact = await collection.SearchAsync(query, 10, new VectorSearchOptions<Dictionary<string, object?>>
            {
                Filter = r => (int)r["Bucket"]! == 3,
                VectorProperty = r => r["Exact"],
            }).ToListAsync();
            Assert.Equal(10, graph.Count); // never fewer than top: the filter runs inside the walk, not after it
            Assert.All(graph, r => Assert.Equal(3, r.Record["Bucket"]));
            overlap += graph.Select(r => r.Record["Key"]).Intersect(exact.Select(r => r.Record["Key"])).Count();
        }

        // Recall@10 against the exact scan. With 10 % passing, the graph may scan the passing items exactly
        // (docs/filters.md); this test measured 200 of 200 when written.
        Assert.True(overlap >= 196, $"overlap {overlap} of 200");

        // With two vector properties, a search must say which one.
        await Assert.ThrowsAsync<InvalidOperationException>(async () => await collection.SearchAsync(new float[16], 1).ToListAsync());
    }
}
