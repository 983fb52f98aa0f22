using System.Buffers.Binary;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Graph;
using VectorKit.IO;
using VectorKit.Persistence;
using VectorKit.Tests.TestData;

namespace VectorKit.Tests.Persistence.Mapped;

/// <summary>
/// <see cref="IndexFile.OpenMapped(string, MappedOpenOptions?, CancellationToken)"/> on every graph variant: the mapped
/// graph holds what was saved and searches exactly like the same file loaded normally (same ids and distances, bit for
/// bit: the same walk runs over the file's links), copies none of the bulk into the process, refuses writes, and stays
/// inside the file when its links are damaged.
/// </summary>
public sealed class MappedGraphTests : IDisposable
{
    internal const int Dim = 8;
    private readonly TempFolder _folder = new();

    public static TheoryData<string> Variants => new()
    {
        "float32-l2", "float32-ip", "float32-cosine", "scalar", "scalar-full", "scalar-external", "wide-links", "empty", "scalar-untrained",
    };

    public void Dispose() => _folder.Dispose();

    [Theory]
    [MemberData(nameof(Variants))]
    public void AMappedGraph_SearchesExactlyLikeTheSameFileLoaded(string variant)
    {
        using GraphIndex saved = Build(variant, count: 400, seed: 3);
        string path = _folder.File(variant + ".vkx");
        IndexFile.Save(saved, path);
        Assert.Equal(6, IndexFile.Inspect(path).FormatVersion);
        using FileVectorSource? source = variant == "scalar-external"
            ? FullVectorSources.WriteNpy(Directory.CreateDirectory(_folder.File("source")).FullName, Data(400, 3), Ids(400), Dim)
            : null;
        using GraphIndex loaded = IndexFile.Load<GraphIndex>(path);
        if (source is not null)
        {
            loaded.AttachFullVectors(source);
        }

        foreach (MappedOpenOptions open in new[] { MappedOpenOptions.Default, MappedOpenOptions.Untrusted })
        {
            using GraphIndex mapped = IndexFile.OpenMapped<GraphIndex>(path, open);
            Assert.True(mapped.IsMapped);
            Assert.False(loaded.IsMapped);
            if (source is not null)
            {
                mapped.AttachFullVectors(source);
            }

            Assert.Equal(
                (loaded.Count, loaded.Dimension, loaded.Metric, loaded.Options.Encoding, loaded.Options.RescoreDepth, loaded.Options.LinksPerNode, loaded.IsTrained),
                (mapped.Count, mapped.Dimension, mapped.Metric, mapped.Options.Encoding, mapped.Options.RescoreDepth, mapped.Options.LinksPerNode, mapped.IsTrained));
            MappedChecks.AssertSameStoredItems(loaded, mapped, [-1, 0, 1000, 1003, 1006, long.MaxValue]);
            if (!loaded.IsTrained || loaded.Count == 0)
            {
                continue;
            }

            float[] queries = ClusteredData.Generate(12, Dim, 6, 0.5f, seed: 99);
            foreach (SearchOptions options in new[]
            {
                SearchOptions.Default,
                new SearchOptions { SearchWidth = 3 },
                new SearchOptions { SearchWidth = 200, RescoreDepth = loaded.Options.RescoreDepth > 0 ? 30 : null },
                new SearchOptions { Filter = id => id % 2 == 0 },
                new SearchOptions { Filter = id => id % 50 == 0 },
            })
            {
                for (int q = 0; q < 12; q++)
                {
                    ReadOnlySpan<float> query = queries.AsSpan(q * Dim, Dim);
                    Assert.Equal(loaded.Search(query, 10, options), mapped.Search(query, 10, options));
                }

                BatchSearchResults expected = loaded.SearchBatch(queries, 7, options);
                BatchSearchResults actual = mapped.SearchBatch(queries, 7, options);
                for (int q = 0; q < 12; q++)
                {
                    Assert.Equal(expected[q].ToArray(), actual[q].ToArray());
                }
            }
        }
    }

    [Fact]
    public void AMappedGraphSavedAgain_GivesTheSameFile()
    {
        using GraphIndex saved = Build("scalar-full", count: 300, seed: 5);
        IndexFile.Save(saved, _folder.File("a.vkx"));
        using (GraphIndex mapped = IndexFile.OpenMapped<GraphIndex>(_folder.File("a.vkx")))
        {
            IndexFile.Save(mapped, _folder.File("b.vkx"));
        }

        Assert.Equal(6, IndexFile.Inspect(_folder.File("b.vkx")).FormatVersion);
        Assert.Equal(File.ReadAllBytes(_folder.File("a.vkx")), File.ReadAllBytes(_folder.File("b.vkx")));
    }

    [Fact]
    public void OpeningCopiesNoneOfTheBulk()
    {
        const int count = 4_000, dimension = 32;
        using (var built = new GraphIndex(dimension, DistanceMetric.SquaredEuclidean, new GraphIndexOptions { MaxDegreeOfParallelism = 1 }))
        {
            built.AddRange(Enumerable.Range(0, count).Select(i => (long)i * 3).ToArray(), ClusteredData.Generate(count, dimension, 8, 0.5f, seed: 1));
            IndexFile.Save(built, _folder.File("bulk.vkx"));
        }

        long fileBytes = new FileInfo(_folder.File("bulk.vkx")).Length;
        long before = GC.GetAllocatedBytesForCurrentThread();
        using GraphIndex mapped = IndexFile.OpenMapped<GraphIndex>(_folder.File("bulk.vkx"));
        long allocated = GC.GetAllocatedBytesForCurrentThread() - before;

        // The file holds about 0.8 MB of rows, links, levels, starts, ids and id order; opening allocates the header
        // and a few objects (MappedGraphOpenCostTests shows that this does not grow with the slots).
        Assert.True(allocated < fileBytes / 20, $"opening allocated {allocated} bytes for a {fileBytes}-byte file of {count} slots");
        Assert.True(mapped.MemoryBytes < fileBytes / 20, $"the mapped graph reports {mapped.MemoryBytes} bytes for a {fileBytes}-byte file");
        Assert.True(mapped.Contains(3 * 1_234));
        Assert.False(mapped.Contains((3 * 1_234) + 1));
    }

    [Fact]
    public void EveryWrite_IsRefused_AndTheGraphStaysAsItWas()
    {
        using GraphIndex saved = PersistenceSamples.ScalarGraph(rescoreDepth: 2);
        IndexFile.Save(saved, _folder.File("ro.vkx"));
        using GraphIndex mapped = IndexFile.OpenMapped<GraphIndex>(_folder.File("ro.vkx"));
        float[] row = [0.1f, 0.2f, 0.3f, 0.4f];
        long present = saved.GetIds()[0];
        MappedChecks.AssertWritesRefused(mapped, present, row, row, "This GraphIndex reads a mapped index file in place and is read-only; wrap it in a SegmentedIndex, or load the file with IndexFile.Load, to add, replace or remove items.");

        Assert.Equal(saved.GetIds(), mapped.GetIds());
        Assert.Equal(saved.Search(row, 5), mapped.Search(row, 5));
    }

    [Theory]
    [InlineData("graph-v1.vkx")]
    [InlineData("graph-scalar-v1.vkx")]
    [InlineData("graph-scalar-codes-v1.vkx")]
    [InlineData("graph-tuned-v2.vkx")]
    [InlineData("graph-v5.vkx")]
    [InlineData("graph-scalar-v5.vkx")]
    public void FixturesOfEveryVersion_OpenMapped_AsTheyLoad(string fixture)
    {
        // Files before version 5 have no id order: their live ids are hashed at open.
        string path = _folder.File(fixture);
        File.Copy(Path.Combine(AppContext.BaseDirectory, "Persistence", "Fixtures", fixture), path);
        using GraphIndex loaded = IndexFile.Load<GraphIndex>(path, IndexLoadOptions.Untrusted);
        using GraphIndex mapped = IndexFile.OpenMapped<GraphIndex>(path, MappedOpenOptions.Untrusted);
        MappedChecks.AssertSameStoredItems(loaded, mapped, [500, 509, 0]);
        Assert.Equal(loaded.TunedDefaults?.ToString(), mapped.TunedDefaults?.ToString());
        foreach (int width in new[] { 1, 4, 64 })
        {
            var options = new SearchOptions { SearchWidth = width };
            Assert.Equal(loaded.Search([0.5f, -0.5f, 1], 5, options), mapped.Search([0.5f, -0.5f, 1], 5, options));
        }
    }

    [Fact]
    [Trait("Weakness", "CWE-125 out-of-bounds read")]
    public void ALinkTargetOutsideTheSlots_IsRejectedWhenVerifying_AndPassedOverOtherwise()
    {
        byte[] file = SaveBytes(Build("float32-l2", count: 60, seed: 2));
        int stride = (2 * 16) + 1; // the bottom layer's default limit, 2 × links per node, and the count
        foreach (int target in new[] { 60, 1_000_000, -5 })
        {
            byte[] damaged = (byte[])file.Clone();

            // Every bottom-layer list of the first 60 slots gets the bad target as its first neighbour.
            EditSection(damaged, SectionId.BottomLinks, links =>
            {
                for (int slot = 0; slot < 60; slot++)
                {
                    if (BinaryPrimitives.ReadInt32LittleEndian(links[(slot * stride * 4)..]) > 0)
                    {
                        BinaryPrimitives.WriteInt32LittleEndian(links[(((slot * stride) + 1) * 4)..], target);
                    }
                }
            });
            string path = _folder.Write(damaged);
            IndexFileException e = Assert.Throws<IndexFileException>(() => IndexFile.OpenMapped<GraphIndex>(path, MappedOpenOptions.Untrusted).Dispose());
            Assert.Contains($"layer 0: link 1 points to slot {target}, outside [0, 60)", e.Message, StringComparison.Ordinal);

            using GraphIndex mapped = IndexFile.OpenMapped<GraphIndex>(path);
            SearchHit[] hits = mapped.Search(Data(1, 9), 10, new SearchOptions { SearchWidth = 60 });
            Assert.NotEmpty(hits);
            Assert.All(hits, hit => Assert.True(mapped.Contains(hit.Id)));
        }
    }

    [Fact]
    [Trait("Weakness", "CWE-125 out-of-bounds read")]
    public void UpperLayerLinksToANodeWithoutThatLayer_AreRejectedWhenVerifying_AndReadAsEmptyOtherwise()
    {
        byte[] file = SaveBytes(Build("float32-l2", count: 400, seed: 2));
        byte[] levels = Section(file, SectionId.NodeLevels);
        int low = Array.IndexOf(levels, (byte)0);
        byte[] damaged = (byte[])file.Clone();

        // The first upper-layer list (layer 1 of the first node above the bottom) names a node of level 0.
        EditSection(damaged, SectionId.UpperLinks, links =>
        {
            BinaryPrimitives.WriteInt32LittleEndian(links, 1);
            BinaryPrimitives.WriteInt32LittleEndian(links[4..], low);
        });
        string path = _folder.Write(damaged);
        IndexFileException e = Assert.Throws<IndexFileException>(() => IndexFile.OpenMapped<GraphIndex>(path, MappedOpenOptions.Untrusted).Dispose());
        Assert.Contains($"layer 1: link 1 points to slot {low}, whose level 0 is below the layer", e.Message, StringComparison.Ordinal);
        using GraphIndex mapped = IndexFile.OpenMapped<GraphIndex>(path);
        float[] queries = Data(20, 9);
        for (int q = 0; q < 20; q++)
        {
            Assert.Equal(10, mapped.Search(queries.AsSpan(q * Dim, Dim), 10).Length);
        }
    }

    [Fact]
    [Trait("Weakness", "CWE-130 length inconsistency")]
    public void LevelsThatDisagreeWithTheUpperLayers_OrExceedTheCap_AreRejectedWhenVerifying_AndReadSafelyOtherwise()
    {
        byte[] file = SaveBytes(Build("float32-l2", count: 400, seed: 2));
        int low = Array.IndexOf(Section(file, SectionId.NodeLevels), (byte)0);
        byte[] raised = (byte[])file.Clone();
        EditSection(raised, SectionId.NodeLevels, levels => levels[low] = 1);
        Assert.Contains("section 'UpperLinkStarts' (id 17)", Reject(raised, MappedOpenOptions.Untrusted).Message, StringComparison.Ordinal);

        byte[] capped = (byte[])file.Clone();
        EditSection(capped, SectionId.NodeLevels, levels => levels[low] = 200);
        Assert.Contains($"section 'NodeLevels' (id 3) (payload from byte {IndexFileBytes.Map(file).Single(s => s.Id == (uint)SectionId.NodeLevels).PayloadStart}) is invalid: slot {low} has level 200; the most is 30", Reject(capped, MappedOpenOptions.Untrusted).Message, StringComparison.Ordinal);

        // Unverified, a version-6 file is not read per slot at open: such a node reads as one of the bottom layer alone.
        float[] queries = Data(20, 9);
        foreach (byte[] damaged in new[] { raised, capped })
        {
            using GraphIndex mapped = IndexFile.OpenMapped<GraphIndex>(_folder.Write(damaged));
            for (int q = 0; q < 20; q++)
            {
                Assert.Equal(10, mapped.Search(queries.AsSpan(q * Dim, Dim), 10).Length);
            }
        }

        // A file without the starts (version 5) builds them from the levels at open, which checks them even unverified.
        Assert.Contains("the levels require", Reject(MappedGraphStartsTests.WithoutStarts(raised)).Message, StringComparison.Ordinal);
        Assert.Contains($"slot {low} has level 200; the most is 30", Reject(MappedGraphStartsTests.WithoutStarts(capped)).Message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("Weakness", "CWE-20 input validation")]
    public void AnIdOrderNamingARemovedSlot_IsRejectedWhenVerifying_AndNeverAnsweredOtherwise()
    {
        // Ids 1000 and 1009 (slots 0 and 3) are removed; the order lists the 398 live slots by id.
        byte[] file = SaveBytes(Build("float32-l2", count: 400, seed: 2));
        byte[] damaged = (byte[])file.Clone();
        EditSection(damaged, SectionId.IdOrder, order => BinaryPrimitives.WriteInt32LittleEndian(order, 0));
        Assert.Contains("the id order names row 0 at position 0, which is removed; it lists live rows only", Reject(damaged, MappedOpenOptions.Untrusted).Message, StringComparison.Ordinal);
        using GraphIndex mapped = IndexFile.OpenMapped<GraphIndex>(_folder.Write(damaged));
        Assert.False(mapped.Contains(1000));
        Assert.False(mapped.TryGetVector(1000, new float[Dim]));
    }

    [Fact]
    [Trait("Weakness", "fuzz (CWE-20, CWE-125, CWE-400)")]
    public void MutatedFiles_OpenAndWork_OrRaiseIndexFileException()
    {
        var corpus = new List<byte[]>();
        foreach (string variant in new[] { "float32-l2", "scalar", "scalar-full", "float32-cosine" })
        {
            corpus.Add(SaveBytes(Build(variant, count: 60, seed: 4)));
        }

        MappedChecks.OpenMutations(corpus, 300, 20261205, _folder.Write);
    }

    /// <summary>A graph of <paramref name="count"/> items (ids 1000 + 3i) with two removed, for each variant.</summary>
    internal static GraphIndex Build(string variant, int count, int seed)
    {
        DistanceMetric metric = variant switch { "float32-ip" => DistanceMetric.InnerProduct, "float32-cosine" or "scalar-full" => DistanceMetric.Cosine, _ => DistanceMetric.SquaredEuclidean };
        var options = new GraphIndexOptions
        {
            LinksPerNode = variant == "wide-links" ? 5 : 16,
            BottomLayerLinks = variant == "wide-links" ? 7 : null,
            MaxDegreeOfParallelism = 1,
            Seed = seed,
            Encoding = variant.StartsWith("scalar", StringComparison.Ordinal) ? VectorEncoding.Scalar8Bit : VectorEncoding.Float32,
            RescoreDepth = variant is "scalar-full" or "scalar-external" ? 12 : 0,
            FullVectors = variant == "scalar-external" ? FullVectorLocation.ExternalSource : FullVectorLocation.InIndexMemory,
        };
        var graph = new GraphIndex(Dim, metric, options);
        if (variant is "empty" or "scalar-untrained")
        {
            return graph;
        }

        float[] data = Data(count, seed);
        graph.Train(data);
        graph.AddRange(Ids(count), data);
        graph.RemoveRange([1000, 1009]);
        return graph;
    }

    internal static float[] Data(int count, int seed) => ClusteredData.Generate(count, Dim, 6, 0.5f, seed);

    private static long[] Ids(int count) => Enumerable.Range(0, count).Select(i => 1000L + (i * 3)).ToArray();

    internal static byte[] SaveBytes(GraphIndex index)
    {
        using (index)
        {
            return IndexFileBytes.Save(index);
        }
    }

    internal static byte[] Section(byte[] file, SectionId id)
    {
        SectionSpan section = IndexFileBytes.Map(file).Single(s => s.Id == (uint)id);
        return file.AsSpan((int)section.PayloadStart, (int)section.Length).ToArray();
    }

    internal static void EditSection(byte[] file, SectionId id, SpanAction edit)
    {
        SectionSpan section = IndexFileBytes.Map(file).Single(s => s.Id == (uint)id);
        edit(file.AsSpan((int)section.PayloadStart, (int)section.Length));
        IndexFileBytes.FixChecksums(file);
    }

    private IndexFileException Reject(byte[] file, MappedOpenOptions? options = null)
        => Assert.Throws<IndexFileException>(() => IndexFile.OpenMapped<GraphIndex>(_folder.Write(file), options).Dispose());

    internal delegate void SpanAction(Span<byte> span);
}
