using Microsoft.Extensions.VectorData;

namespace VectorKit.VectorData.Tests;

/// <summary>Record round trips, key types, record shapes and the error behaviour the abstraction documents.</summary>
public class CollectionBehaviourTests
{
    private static GearItem Item(int id, params float[] v) => new() { Id = id, Category = "Tent", Tags = ["winter"], Seasons = ["summer"], Rating = 4, Embedding = v };

    [Fact]
    public async Task Upsert_get_delete_single_and_batch()
    {
        using var store = new VectorKitStore();
        var collection = store.GetCollection<int, GearItem>("gear");
        Assert.False(await collection.CollectionExistsAsync());
        await collection.EnsureCollectionExistsAsync();
        Assert.True(await collection.CollectionExistsAsync());

        await collection.UpsertAsync(Item(1, 1, 0, 0, 0));
        await collection.UpsertAsync([Item(2, 0, 1, 0, 0), Item(3, 0, 0, 1, 0)]);
        GearItem? one = await collection.GetAsync(1, new RecordRetrievalOptions { IncludeVectors = true });
        Assert.NotNull(one);
        Assert.Equal(["winter"], one.Tags);
        Assert.Equal(["summer"], one.Seasons);
        Assert.Equal(4, one.Rating);
        Assert.Equal([1f, 0, 0, 0], one.Embedding!.Value.ToArray());
        Assert.Null((await collection.GetAsync(2))!.Embedding); // vectors only when asked for

        // Replacing keeps one record per key and moves its vector.
        await collection.UpsertAsync(Item(1, 0, 0, 0, 5));
        var nearest = await collection.SearchAsync(new ReadOnlyMemory<float>([0, 0, 0, 5]), 1).SingleAsync();
        Assert.Equal(1, nearest.Record.Id);
        Assert.Equal(0, nearest.Score);
        Assert.Equal(3, await collection.GetAsync(r => true, 10).CountAsync());

        Assert.Equal([2, 3], await collection.GetAsync([2, 3, 99]).Select(r => r.Id).ToListAsync());
        await collection.DeleteAsync(2);
        await collection.DeleteAsync([3, 99]);
        Assert.Equal([1], await collection.GetAsync(r => true, 10).Select(r => r.Id).ToListAsync());
        Assert.Null(await collection.GetAsync(2));
        Assert.Single(await collection.SearchAsync(new float[] { 0, 1, 0, 0 }, 10).ToListAsync());

        await collection.EnsureCollectionDeletedAsync();
        Assert.False(await store.CollectionExistsAsync("gear"));
    }

    [Fact]
    public async Task Guid_long_and_string_keys_and_the_scores_of_each_distance_function()
    {
        using var store = new VectorKitStore();
        var guids = store.GetCollection<Guid, GuidRecord>("guids");
        await guids.EnsureCollectionExistsAsync();
        Guid a = Guid.NewGuid(), b = Guid.NewGuid();
        await guids.UpsertAsync([new GuidRecord { Key = a, Name = "a", Vector = [1, 0, 0] }, new GuidRecord { Key = b, Name = "b", Vector = [1, 1, 0] }]);
        var cosine = await guids.SearchAsync(new float[] { 2, 0, 0 }, 2).ToListAsync();
        Assert.Equal([a, b], cosine.Select(r => r.Record.Key));
        Assert.Equal(1.0, cosine[0].Score!.Value, 5); // cosine similarity, higher is better
        Assert.Equal(1 / Math.Sqrt(2), cosine[1].Score!.Value, 5);
        Assert.Single(await guids.SearchAsync(new float[] { 2, 0, 0 }, 2, new() { ScoreThreshold = 0.9 }).ToListAsync());

        var longs = store.GetCollection<long, LongRecord>("longs");
        await longs.EnsureCollectionExistsAsync();
        var when = new DateTimeOffset(2026, 3, 1, 8, 30, 0, TimeSpan.FromHours(2));
        await longs.UpsertAsync([new LongRecord { Key = 1L << 40, When = when, Amount = 12.34m, Vector = new float[] { 1, 2 } }, new LongRecord { Key = 5, Vector = new float[] { 3, 0 } }]);
        var dot = await longs.SearchAsync(new float[] { 1, 1 }, 2).ToListAsync();
        Assert.Equal([1L << 40, 5L], dot.Select(r => r.Record.Key));
        Assert.Equal([3.0, 3.0], dot.Select(r => r.Score!.Value)); // dot product similarity; the tie goes to the earlier record
        var first = (await longs.GetAsync(1L << 40))!;
        Assert.Equal(when, first.When);
        Assert.Equal(12.34m, first.Amount);

        var notes = store.GetCollection<string, NoteRecord>("notes", new VectorKitCollectionOptions { EmbeddingGenerator = new HashEmbeddingGenerator(8) });
        await notes.EnsureCollectionExistsAsync();
        await notes.UpsertAsync([new NoteRecord { Key = "x", Text = "dry bag", TextEmbedding = "dry bag" }, new NoteRecord { Key = "y", Text = "camp stove", TextEmbedding = "camp stove" }]);
        Assert.Equal("y", (await notes.SearchAsync("camp stove", 1).SingleAsync()).Record.Key);
    }

    [Fact]
    public async Task Each_distance_function_reports_its_own_score()
    {
        float[] stored = [3, 4], query = [0, 0];
        (string Function, double Score)[] cases =
        [
            (DistanceFunction.EuclideanSquaredDistance, 25),
            (DistanceFunction.EuclideanDistance, 5),
            (DistanceFunction.DotProductSimilarity, 0),
            (DistanceFunction.NegativeDotProductSimilarity, 0),
        ];
        foreach ((string function, double expected) in cases)
        {
            using var store = new VectorKitStore();
            var definition = Definition(2, function, null);
            var collection = store.GetDynamicCollection("c", definition);
            await collection.EnsureCollectionExistsAsync();
            await collection.UpsertAsync(new Dictionary<string, object?> { ["Key"] = 1, ["Name"] = "one", ["Vector"] = new ReadOnlyMemory<float>(stored) });
            var result = await collection.SearchAsync(new ReadOnlyMemory<float>(query), 1).SingleAsync();
            Assert.Equal(expected, result.Score!.Value, 5);
            Assert.Equal("one", result.Record["Name"]);
        }

        using var cosineStore = new VectorKitStore();
        var cos = cosineStore.GetDynamicCollection("c", Definition(2, DistanceFunction.CosineDistance, null));
        await cos.EnsureCollectionExistsAsync();
        await cos.UpsertAsync(new Dictionary<string, object?> { ["Key"] = 1, ["Name"] = "one", ["Vector"] = new ReadOnlyMemory<float>([1, 0]) });
        Assert.Equal(1.0, (await cos.SearchAsync(new ReadOnlyMemory<float>([0, 1]), 1).SingleAsync()).Score!.Value, 5);
        Assert.Empty(await cos.SearchAsync(new ReadOnlyMemory<float>([0, 1]), 1, new() { ScoreThreshold = 0.5 }).ToListAsync());
    }

    [Fact]
    public async Task Definition_defined_records_without_attributes()
    {
        using var store = new VectorKitStore();
        var definition = new VectorStoreCollectionDefinition
        {
            Properties =
            [
                new VectorStoreKeyProperty(nameof(PlainRecord.Code), typeof(string)),
                new VectorStoreDataProperty(nameof(PlainRecord.Size), typeof(int)) { IsIndexed = true },
                new VectorStoreVectorProperty(nameof(PlainRecord.Vector), typeof(float[]), 2) { DistanceFunction = DistanceFunction.EuclideanSquaredDistance },
            ],
        };
        var collection = store.GetCollection<string, PlainRecord>("plain", definition);
        await collection.EnsureCollectionExistsAsync();
        await collection.UpsertAsync([new PlainRecord { Code = "A-1", Size = 2, Vector = [0, 0] }, new PlainRecord { Code = "B-2", Size = 5, Vector = [1, 1] }]);
        var hit = await collection.SearchAsync(new float[] { 1, 1 }, 5, new() { Filter = r => r.Size < 3 }).SingleAsync();
        Assert.Equal("A-1", hit.Record.Code);
        Assert.Equal(2, hit.Score);
    }

    [Fact]
    public async Task A_missing_collection_throws_the_abstractions_exception()
    {
        using var store = new VectorKitStore();
        var collection = store.GetCollection<int, GearItem>("never-created");
        var e = await Assert.ThrowsAsync<VectorStoreException>(() => collection.UpsertAsync(Item(1, 0, 0, 0, 0)));
        Assert.Equal("never-created", e.CollectionName);
        Assert.Equal("Upsert", e.OperationName);
        Assert.Contains("does not exist", e.Message);
        await Assert.ThrowsAsync<VectorStoreException>(() => collection.GetAsync(1));
        await Assert.ThrowsAsync<VectorStoreException>(async () => await collection.SearchAsync(new float[4], 1).ToListAsync());
        await collection.EnsureCollectionDeletedAsync(); // deleting what is not there is fine
    }

    [Fact]
    public async Task Invalid_batches_throw_and_write_nothing()
    {
        using var store = new VectorKitStore();
        var collection = store.GetCollection<int, GearItem>("gear");
        await collection.EnsureCollectionExistsAsync();
        await collection.UpsertAsync(Item(1, 1, 1, 1, 1));

        var duplicate = await Assert.ThrowsAsync<ArgumentException>(() => collection.UpsertAsync([Item(2, 0, 0, 0, 0), Item(2, 1, 0, 0, 0)]));
        Assert.Contains("Key '2' appears more than once", duplicate.Message);

        var dimension = await Assert.ThrowsAsync<ArgumentException>(() => collection.UpsertAsync([Item(3, 0, 0, 0, 0), Item(4, 1, 2, 3)]));
        Assert.Contains("has 3 dimensions; the collection expects 4", dimension.Message);

        var nan = await Assert.ThrowsAsync<ArgumentException>(() => collection.UpsertAsync(Item(5, float.NaN, 0, 0, 0)));
        Assert.Contains("must be finite", nan.Message);

        await Assert.ThrowsAsync<ArgumentNullException>(() => collection.UpsertAsync((GearItem)null!));
        var nullInBatch = await Assert.ThrowsAsync<ArgumentNullException>(() => collection.UpsertAsync([Item(6, 0, 0, 0, 0), null!]));
        Assert.Contains("Record 1 of the batch is null", nullInBatch.Message);

        var query = await Assert.ThrowsAsync<ArgumentException>(async () => await collection.SearchAsync(new float[3], 1).ToListAsync());
        Assert.Contains("3 dimensions", query.Message);
        await Assert.ThrowsAsync<ArgumentOutOfRangeException>(async () => await collection.SearchAsync(new float[4], 0).ToListAsync());
        await Assert.ThrowsAsync<ArgumentOutOfRangeException>(async () => await collection.SearchAsync(new float[4], 1, new() { Skip = -1 }).ToListAsync());

        Assert.Equal([1], await collection.GetAsync(r => true, 100).Select(r => r.Id).ToListAsync());
    }

    [Fact]
    public async Task Unsupported_filters_index_kinds_and_distance_functions_say_what_is_supported()
    {
        using var store = new VectorKitStore();
        var collection = store.GetCollection<int, GearItem>("gear");
        await collection.EnsureCollectionExistsAsync();
        var filter = await Assert.ThrowsAsync<NotSupportedException>(async () =>
            await collection.SearchAsync(new float[4], 1, new() { Filter = r => r.Category.StartsWith("T") }).ToListAsync());
        Assert.Contains("is not supported by VectorKit. Supported: ==, !=", filter.Message);

        var hamming = Assert.Throws<NotSupportedException>(() => store.GetDynamicCollection("h", Definition(2, DistanceFunction.HammingDistance, null)));
        Assert.Contains("Vector property 'Vector': distance function 'HammingDistance' is not supported", hamming.Message);
        Assert.Contains("supported: CosineSimilarity, CosineDistance", hamming.Message);

        var kind = Assert.Throws<NotSupportedException>(() => store.GetDynamicCollection("k", Definition(2, null, "SomethingElse")));
        Assert.Contains("index kind 'SomethingElse' is not supported by VectorKit; supported: Flat, Hnsw, IvfFlat", kind.Message);

        Assert.Throws<ArgumentException>(() => store.GetCollection<int, GearItem>("bad/name"));
        Assert.Throws<NotSupportedException>(() => store.GetCollection<byte, BadVectorRecord>("bad"));
    }

    [Fact]
    public async Task Records_are_copied_in_and_out()
    {
        using var store = new VectorKitStore();
        var collection = store.GetCollection<int, GearItem>("gear");
        await collection.EnsureCollectionExistsAsync();
        var item = Item(1, 1, 2, 3, 4);
        await collection.UpsertAsync(item);
        item.Tags[0] = "changed";
        item.Seasons.Add("autumn");
        var back = (await collection.GetAsync(1))!;
        Assert.Equal(["winter"], back.Tags);
        back.Seasons.Add("spring");
        Assert.Equal(["summer"], (await collection.GetAsync(1))!.Seasons);
    }

    [Fact]
    public async Task Embeddings_are_generated_once_per_batch_and_include_vectors_is_refused()
    {
        var generator = new HashEmbeddingGenerator(8);
        using var store = new VectorKitStore(new VectorKitStoreOptions { EmbeddingGenerator = generator });
        var notes = store.GetCollection<string, NoteRecord>("notes");
        await notes.EnsureCollectionExistsAsync();
        await notes.UpsertAsync(Enumerable.Range(0, 20).Select(i => new NoteRecord { Key = $"n{i}", Text = $"note {i}", TextEmbedding = $"note {i} words" }));
        Assert.Equal(1, generator.Calls);
        Assert.Equal(20, generator.Inputs);
        await Assert.ThrowsAsync<NotSupportedException>(() => notes.GetAsync("n1", new RecordRetrievalOptions { IncludeVectors = true }));
        Assert.Equal("n7", (await notes.SearchAsync("note 7 words", 1).SingleAsync()).Record.Key);
    }

    [Fact]
    public async Task Collections_share_data_by_name_and_are_listed()
    {
        using var store = new VectorKitStore();
        var first = store.GetCollection<int, GearItem>("gear");
        await first.EnsureCollectionExistsAsync();
        await first.UpsertAsync(Item(1, 1, 0, 0, 0));
        var second = store.GetCollection<int, GearItem>("gear");
        Assert.NotNull(await second.GetAsync(1));
        var dynamic = store.GetDynamicCollection("gear", new VectorStoreCollectionDefinition
        {
            Properties = [new VectorStoreKeyProperty("Id", typeof(int)), new VectorStoreDataProperty("Category", typeof(string))],
        });
        Assert.Equal("Tent", (await dynamic.GetAsync(1))!["Category"]);
        Assert.Equal(["gear"], await store.ListCollectionNamesAsync().ToListAsync());

        var other = store.GetCollection<string, NoteRecord>("gear", new VectorKitCollectionOptions { EmbeddingGenerator = new HashEmbeddingGenerator(8) });
        var mismatch = await Assert.ThrowsAsync<VectorStoreException>(() => other.GetAsync("x"));
        Assert.Contains("exists with a different schema", mismatch.Message);
    }

    [Fact]
    public async Task Filtered_get_orders_skips_and_takes()
    {
        using var store = new VectorKitStore();
        var collection = store.GetCollection<int, GearItem>("gear");
        await collection.EnsureCollectionExistsAsync();
        var items = FilterPropertyTests.RandomItems(new Random(3), 30);
        await collection.UpsertAsync(items);
        var expected = items.Where(i => i.InStock).OrderByDescending(i => i.Price).ThenBy(i => i.Count).Skip(2).Take(5).Select(i => i.Id).ToList();
        var actual = await collection.GetAsync(r => r.InStock, 5, new FilteredRecordRetrievalOptions<GearItem>
        {
            Skip = 2,
            OrderBy = o => o.Descending(r => r.Price).Ascending(r => r.Count),
        }).Select(r => r.Id).ToListAsync();
        Assert.Equal(expected, actual);
    }

    internal static VectorStoreCollectionDefinition Definition(int dimension, string? function, string? kind) => new()
    {
        Properties =
        [
            new VectorStoreKeyProperty("Key", typeof(int)),
            new VectorStoreDataProperty("Name", typeof(string)),
            new VectorStoreVectorProperty("Vector", typeof(ReadOnlyMemory<float>), dimension) { DistanceFunction = function, IndexKind = kind },
        ],
    };

    public sealed class PlainRecord
    {
        public string Code { get; set; } = "";

        public int Size { get; set; }

        public float[]? Vector { get; set; }
    }

    public sealed class BadVectorRecord
    {
        [VectorStoreKey]
        public byte Key { get; set; }

        [VectorStoreVector(2)]
        public float[]? Vector { get; set; }
    }
}
