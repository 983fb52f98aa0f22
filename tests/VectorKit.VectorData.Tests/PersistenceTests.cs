using Microsoft.Extensions.VectorData;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;

namespace VectorKit.VectorData.Tests;

/// <summary>Store directories: round trips, atomic replacement, hostile files, and index kinds that switch after training.</summary>
public sealed class PersistenceTests : IDisposable
{
    private readonly string _directory = Path.Combine(Path.GetTempPath(), "vectorkit-vd-" + Guid.NewGuid().ToString("N"));

    public void Dispose()
    {
        if (Directory.Exists(_directory))
        {
            Directory.Delete(_directory, recursive: true);
        }
    }

    [Theory]
    [InlineData(IndexKind.Flat)]
    [InlineData(IndexKind.Hnsw)]
    [InlineData(IndexKind.IvfFlat)]
    [InlineData(IndexKind.QuantizedFlat)]
    [InlineData(IndexKind.Dynamic)]
    [InlineData(VectorKitIndexKind.InvertedFileScalar8Bit)]
    [InlineData(VectorKitIndexKind.InvertedFileProductCodes)]
    public async Task A_saved_collection_loads_with_the_same_records_and_answers(string kind)
    {
        var options = new VectorKitStoreOptions { Directory = _directory, TrainingThreshold = 64 };
        var definition = Definition(kind);
        var random = new Random(11);
        var records = Enumerable.Range(0, 300).Select(i => new Dictionary<string, object?>
        {
            ["Key"] = $"item-{i}",
            ["Text"] = i % 7 == 0 ? $"trail pack model TR-{i}" : "trail pack",
            ["Tags"] = new[] { i % 2 == 0 ? "even" : "odd" },
            ["Vector"] = new ReadOnlyMemory<float>(Enumerable.Range(0, 16).Select(_ => (float)random.NextDouble() - 0.5f).ToArray()),
        }).ToList();
        float[] query = Enumerable.Range(0, 16).Select(_ => (float)random.NextDouble() - 0.5f).ToArray();

        List<(string, double?)> before, hybridBefore;
        using (var store = new VectorKitStore(options))
        {
            var collection = store.GetDynamicCollection("packs", definition);
            await collection.EnsureCollectionExistsAsync();
            await collection.UpsertAsync(records.Take(150));
            await collection.UpsertAsync(records.Skip(150));
            await collection.DeleteAsync(["item-3", "item-4"]);
            before = await Search(collection, query);
            hybridBefore = await Hybrid(collection, query);
            await store.SaveAsync();
        }

        Assert.Equal(["packs.vkcollection"], Directory.GetFiles(_directory).Select(Path.GetFileName));
        using (var store = new VectorKitStore(options))
        {
            Assert.Equal(["packs"], await store.ListCollectionNamesAsync().ToListAsync());
            var collection = store.GetDynamicCollection("packs", definition);
            Assert.True(await collection.CollectionExistsAsync());
            Assert.Equal(before, await Search(collection, query));
            Assert.Equal(hybridBefore, await Hybrid(collection, query));
            var back = await collection.GetAsync("item-14", new RecordRetrievalOptions { IncludeVectors = true });
            Assert.Equal("trail pack model TR-14", back!["Text"]);
            Assert.Equal(new[] { "even" }, back["Tags"]);
            Assert.Equal(((ReadOnlyMemory<float>)records[14]["Vector"]!).ToArray(), ((ReadOnlyMemory<float>)back["Vector"]!).ToArray());
            Assert.Null(await collection.GetAsync("item-3"));
            Assert.Equal(298, await collection.GetAsync(r => true, 1000).CountAsync());

            // The loaded collection keeps working and saves again over the old file.
            await collection.UpsertAsync(records[3]);
            await collection.SaveAsync();
            await collection.EnsureCollectionDeletedAsync();
            Assert.Empty(Directory.GetFiles(_directory));
        }
    }

    [Fact]
    public async Task Kinds_that_learn_switch_to_their_target_at_the_training_threshold()
    {
        (string Kind, Type Target, int Needed)[] cases =
        [
            (IndexKind.IvfFlat, typeof(InvertedFileIndex), 50),
            (IndexKind.Dynamic, typeof(GraphIndex), 50),
            (IndexKind.QuantizedFlat, typeof(Indexes.Exact.ExactIndex), 50),
            (VectorKitIndexKind.InvertedFileProductCodes, typeof(InvertedFileIndex), 256), // one row per codeword at least
        ];
        foreach ((string kind, Type target, int needed) in cases)
        {
            using var store = new VectorKitStore(new VectorKitStoreOptions { TrainingThreshold = 50 });
            var collection = store.GetDynamicCollection("c", Definition(kind));
            await collection.EnsureCollectionExistsAsync();
            var random = new Random(5);
            Dictionary<string, object?> Record(int i) => new()
            {
                ["Key"] = $"k{i}",
                ["Vector"] = new ReadOnlyMemory<float>(Enumerable.Range(0, 16).Select(_ => (float)random.NextDouble()).ToArray()),
            };

            await collection.UpsertAsync(Enumerable.Range(0, needed - 1).Select(Record));
            Assert.True(store.TryGetState("c", "test", out CollectionState? state));
            Assert.False(state.Slots["Vector"].Switched);
            await collection.UpsertAsync(Record(needed - 1));
            Assert.True(state.Slots["Vector"].Switched);
            Assert.IsType(target, state.Slots["Vector"].Index);
            Assert.Equal(needed, state.Slots["Vector"].Index.Count);
            var self = (ReadOnlyMemory<float>)(await collection.GetAsync("k7", new RecordRetrievalOptions { IncludeVectors = true }))!["Vector"]!;
            Assert.Contains("k7", await collection.SearchAsync(self, 5).Select(r => (string)r.Record["Key"]!).ToListAsync());
        }
    }

    [Fact]
    public async Task A_damaged_file_is_reported_as_a_store_exception_naming_the_cause()
    {
        var options = new VectorKitStoreOptions { Directory = _directory };
        await SaveSmall(options);
        string path = Path.Combine(_directory, "packs.vkcollection");
        byte[] bytes = await File.ReadAllBytesAsync(path);

        bytes[bytes.Length / 2] ^= 0x40;
        await File.WriteAllBytesAsync(path, bytes);
        var flipped = await Assert.ThrowsAsync<VectorStoreException>(() => Load(options));
        Assert.IsType<CollectionFileException>(flipped.InnerException);
        Assert.Contains("checksum mismatch", flipped.Message);

        await File.WriteAllBytesAsync(path, bytes[..^20]);
        await Assert.ThrowsAsync<VectorStoreException>(() => Load(options));

        await File.WriteAllBytesAsync(path, "not a collection"u8.ToArray());
        var magic = await Assert.ThrowsAsync<VectorStoreException>(() => Load(options));
        Assert.Contains("magic bytes differ", magic.Message);
    }

    [Fact]
    [Trait("CWE", "770")]
    public async Task Record_limits_apply_when_loading()
    {
        await SaveSmall(new VectorKitStoreOptions { Directory = _directory });
        var tooMany = await Assert.ThrowsAsync<VectorStoreException>(() => Load(new VectorKitStoreOptions { Directory = _directory, MaxRecords = 2 }));
        Assert.Contains("3 records exceed the limit of 2", tooMany.Message);
        var longString = await Assert.ThrowsAsync<VectorStoreException>(() => Load(new VectorKitStoreOptions { Directory = _directory, MaxStringBytes = 4 }));
        Assert.Contains("exceeds the limit of 4", longString.Message);
    }

    [Fact]
    [Trait("CWE", "789")]
    public void A_hostile_count_is_refused_before_anything_is_allocated()
    {
        // A record count of 2^31 − 1 in a file of a few dozen bytes: the cursor checks it against the bytes left.
        var cursor = new FileCursor(new byte[] { 0xFF, 0xFF, 0xFF, 0x7F, 1, 2, 3 }, 100);
        try
        {
            cursor.Count(13);
            Assert.Fail("the count was accepted");
        }
        catch (CollectionFileException e)
        {
            Assert.Contains("exceeds the 3 bytes left", e.Message);
        }
    }

    private async Task SaveSmall(VectorKitStoreOptions options)
    {
        using var store = new VectorKitStore(options);
        var collection = store.GetDynamicCollection("packs", Definition(IndexKind.Flat));
        await collection.EnsureCollectionExistsAsync();
        await collection.UpsertAsync(Enumerable.Range(0, 3).Select(i => new Dictionary<string, object?>
        {
            ["Key"] = $"k{i}",
            ["Text"] = "a fairly long description text",
            ["Vector"] = new ReadOnlyMemory<float>(Enumerable.Range(0, 16).Select(j => (float)(i + j + 1)).ToArray()),
        }));
        await collection.SaveAsync();
    }

    private static async Task Load(VectorKitStoreOptions options)
    {
        using var store = new VectorKitStore(options);
        await store.GetDynamicCollection("packs", Definition(IndexKind.Flat)).GetAsync("k0");
    }

    private static async Task<List<(string, double?)>> Search(VectorStoreCollection<object, Dictionary<string, object?>> collection, float[] query) =>
        await collection.SearchAsync(new ReadOnlyMemory<float>(query), 10, new VectorSearchOptions<Dictionary<string, object?>>
        {
            Filter = r => ((string[])r["Tags"]!).Contains("even"),
        }).Select(r => ((string)r.Record["Key"]!, r.Score)).ToListAsync();

    private static async Task<List<(string, double?)>> Hybrid(VectorStoreCollection<object, Dictionary<string, object?>> collection, float[] query) =>
        await ((IKeywordHybridSearchable<Dictionary<string, object?>>)collection).HybridSearchAsync(new ReadOnlyMemory<float>(query), ["TR-56", "TR-91"], 5)
            .Select(r => ((string)r.Record["Key"]!, r.Score)).ToListAsync();

    private static VectorStoreCollectionDefinition Definition(string kind) => new()
    {
        Properties =
        [
            new VectorStoreKeyProperty("Key", typeof(string)),
            new VectorStoreDataProperty("Text", typeof(string)) { IsFullTextIndexed = true },
            new VectorStoreDataProperty("Tags", typeof(string[])) { IsIndexed = true },
            new VectorStoreVectorProperty("Vector", typeof(ReadOnlyMemory<float>), 16) { IndexKind = kind, DistanceFunction = DistanceFunction.EuclideanSquaredDistance },
        ],
    };
}

/// <summary>Save then load returns every record as it was, for random records, edits and deletions.</summary>
public class PersistenceRoundTripProperty
{
    [FsCheck.Xunit.Property(MaxTest = 25)]
    public void Random_records_survive_save_and_load(int seed)
    {
        string directory = Path.Combine(Path.GetTempPath(), "vectorkit-vd-prop-" + Guid.NewGuid().ToString("N"));
        try
        {
            var random = new Random(seed);
            List<GearItem> items = FilterPropertyTests.RandomItems(random, random.Next(0, 40));
            foreach (GearItem item in items.Where(_ => random.Next(4) == 0))
            {
                item.Rating = null;
                item.Embedding = null; // a record without a vector is stored, but not searchable
            }

            var deleted = items.Where(_ => random.Next(5) == 0).Select(i => i.Id).ToList();
            var options = new VectorKitStoreOptions { Directory = directory };
            float[] query = [1, -1, 2, 0];
            List<int> before;
            using (var store = new VectorKitStore(options))
            {
                var collection = store.GetCollection<int, GearItem>("gear");
                collection.EnsureCollectionExistsAsync().GetAwaiter().GetResult();
                collection.UpsertAsync(items).GetAwaiter().GetResult();
                collection.DeleteAsync(deleted).GetAwaiter().GetResult();
                before = collection.SearchAsync(query, 50).ToBlockingList().Select(r => r.Record.Id).ToList();
                store.SaveAsync().GetAwaiter().GetResult();
            }

            using (var store = new VectorKitStore(options))
            {
                var collection = store.GetCollection<int, GearItem>("gear");
                var expected = items.Where(i => !deleted.Contains(i.Id)).ToList();
                var loaded = collection.GetAsync(r => true, int.MaxValue, new FilteredRecordRetrievalOptions<GearItem> { IncludeVectors = true }).ToBlockingList();
                Assert.Equal(expected.Select(Describe), loaded.Select(Describe));
                Assert.Equal(before, collection.SearchAsync(query, 50).ToBlockingList().Select(r => r.Record.Id).ToList());
            }
        }
        finally
        {
            if (Directory.Exists(directory))
            {
                Directory.Delete(directory, recursive: true);
            }
        }
    }

    private static string Describe(GearItem i) =>
        $"{i.Id}|{i.Category}|{i.Count}|{i.Price:R}|{i.Weight:R}|{i.InStock}|{i.Rating}|{string.Join(',', i.Tags)}|{string.Join(',', i.Seasons)}|{i.Description}|"
        + (i.Embedding is { } e ? string.Join(',', e.ToArray()) : "none");
}
