using FsCheck;
using FsCheck.Xunit;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.IO;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Persistence;
using VectorKit.Quantization;
using VectorKit.Tests.TestData;

namespace VectorKit.Tests.Persistence.Mapped;

/// <summary>
/// <see cref="IndexFile.OpenMapped(string, MappedOpenOptions?, CancellationToken)"/> on every inverted-file variant: the
/// mapped index holds what was saved and searches like the index that was saved (same ids and distances, bit for bit:
/// the same scan runs over the file's pages), copies none of the lists into the process, and refuses writes.
/// </summary>
public sealed class MappedInvertedFileTests : IDisposable
{
    private const int Dim = 8;
    private readonly TempFolder _folder = new();

    private static readonly string[] s_variants =
    [
        "float32-l2", "float32-ip", "float32-cosine", "scalar", "scalar-full", "product", "product-rotated-full",
        "fast-scan", "fast-scan-full-ip", "fast-scan-cosine", "empty", "untrained", "product-external",
    ];

    public static TheoryData<string> Variants => new(s_variants);

    public void Dispose() => _folder.Dispose();

    [Theory]
    [MemberData(nameof(Variants))]
    public void AMappedInvertedFile_HoldsAndSearchesWhatWasSaved(string variant)
    {
        using InvertedFileIndex saved = Build(variant, count: 300, seed: 3);
        string path = _folder.File(variant + ".vkx");
        IndexFile.Save(saved, path);
        using FileVectorSource? source = variant == "product-external" ? FullVectorSources.WriteNpy(Directory.CreateDirectory(_folder.File("source")).FullName, Data(300, 3), Ids(300), Dim) : null;
        if (source is not null)
        {
            saved.AttachFullVectors(source);
        }

        foreach (MappedOpenOptions open in new[] { MappedOpenOptions.Default, MappedOpenOptions.Untrusted })
        {
            using var mapped = (InvertedFileIndex)IndexFile.OpenMapped(path, open);
            if (source is not null)
            {
                mapped.AttachFullVectors(source);
            }

            AssertSame(saved, mapped);
        }
    }

    // Saving a mapped inverted file once failed (its lists were read as if they were in memory).
    [Theory]
    [MemberData(nameof(Variants))]
    public void AMappedInvertedFileSavedAgain_GivesTheSameFile(string variant)
    {
        using (InvertedFileIndex saved = Build(variant, count: 300, seed: 4))
        {
            IndexFile.Save(saved, _folder.File("a.vkx"));
        }

        using (var mapped = (InvertedFileIndex)IndexFile.OpenMapped(_folder.File("a.vkx")))
        {
            IndexFile.Save(mapped, _folder.File("b.vkx"));
        }

        Assert.Equal(File.ReadAllBytes(_folder.File("a.vkx")), File.ReadAllBytes(_folder.File("b.vkx")));
    }

    [Property(MaxTest = 25)]
    public void AnySavedInvertedFile_OpensMappedToTheSameAnswers(NonNegativeInt variantPick, NonNegativeInt countPick, int seed)
    {
        string variant = s_variants[variantPick.Get % (s_variants.Length - 1)];
        using InvertedFileIndex saved = Build(variant, count: 40 + (countPick.Get % 200), seed: seed & 0xFFFF);
        string path = _folder.File($"p-{Guid.NewGuid():N}.vkx");
        IndexFile.Save(saved, path);
        using var mapped = IndexFile.OpenMapped<InvertedFileIndex>(path, MappedOpenOptions.Untrusted);
        AssertSame(saved, mapped);
    }

    [Fact]
    public void OpeningCopiesNoneOfTheLists_AndTheMappedIndexCountsOnlyItsSmallTables()
    {
        const int count = 20_000;
        using (InvertedFileIndex built = Build("scalar-full", count, seed: 1))
        {
            IndexFile.Save(built, _folder.File("bulk.vkx"));
        }

        long fileBytes = new FileInfo(_folder.File("bulk.vkx")).Length;
        long before = GC.GetAllocatedBytesForCurrentThread();
        using var mapped = IndexFile.OpenMapped<InvertedFileIndex>(_folder.File("bulk.vkx"));
        long allocated = GC.GetAllocatedBytesForCurrentThread() - before;

        // 20,000 entries of 16-byte codes, 32-byte vectors, ids and id order: about 1.4 MB; the centroids and
        // per-list tables of 16 lists are a few hundred bytes.
        Assert.True(allocated < fileBytes / 20, $"opening allocated {allocated} bytes for a {fileBytes}-byte file");
        Assert.True(mapped.MemoryBytes < fileBytes / 20, $"the mapped index reports {mapped.MemoryBytes} bytes for a {fileBytes}-byte file");
        Assert.Equal(count - 2, mapped.Count);
        Assert.True(mapped.Contains(200 + (5 * 12_345)));
    }

    [Fact]
    public void EveryWrite_IsRefused_AndTheIndexStaysAsItWas()
    {
        using InvertedFileIndex saved = Build("scalar-full", 100, seed: 2);
        IndexFile.Save(saved, _folder.File("ro.vkx"));
        using var mapped = IndexFile.OpenMapped<InvertedFileIndex>(_folder.File("ro.vkx"));
        float[] row = Data(1, 9);
        long present = saved.GetIds()[0];
        MappedChecks.AssertWritesRefused(mapped, present, row, Data(64, 4), "This InvertedFileIndex reads a mapped index file in place and is read-only; wrap it in a SegmentedIndex, or load the file with IndexFile.Load, to add, replace or remove items.");

        AssertSame(saved, mapped);
    }

    [Fact]
    public void AFastScanFileOfAnOlderVersion_IsRefusedWithTheWayOut_AndOtherOlderFilesOpen()
    {
        string fixtures = Path.Combine(AppContext.BaseDirectory, "Persistence", "Fixtures");
        NotSupportedException e = Assert.Throws<NotSupportedException>(() => IndexFile.OpenMapped(Path.Combine(fixtures, "ivf-fast-scan-v1.vkx")));
        Assert.Contains("fast-scan inverted file of format version 1, whose codes are stored one after another rather than in the search's blocks", e.Message, StringComparison.Ordinal);
        Assert.Contains("load and save it again to write format version 4", e.Message, StringComparison.Ordinal);

        // Version 1 has no id order: the ids are hashed at open, and the index answers as the loaded one.
        foreach (string name in new[] { "ivf-v1.vkx", "ivf-product-rotation-v1.vkx", "ivf-tuned-v2.vkx" })
        {
            using var loaded = IndexFile.Load<InvertedFileIndex>(Path.Combine(fixtures, name));
            using var mapped = IndexFile.OpenMapped<InvertedFileIndex>(Path.Combine(fixtures, name), MappedOpenOptions.Untrusted);
            AssertSame(loaded, mapped);
        }
    }

    internal static InvertedFileIndex Build(string variant, int count, int seed)
    {
        DistanceMetric metric = variant.EndsWith("-ip", StringComparison.Ordinal) ? DistanceMetric.InnerProduct
            : variant.EndsWith("-cosine", StringComparison.Ordinal) ? DistanceMetric.Cosine : DistanceMetric.SquaredEuclidean;
        bool fastScan = variant.StartsWith("fast-scan", StringComparison.Ordinal);
        VectorEncoding encoding = variant.StartsWith("float32", StringComparison.Ordinal) || variant is "empty" or "untrained" ? VectorEncoding.Float32
            : variant.StartsWith("scalar", StringComparison.Ordinal) ? VectorEncoding.Scalar8Bit : VectorEncoding.ProductCodes;
        bool full = variant.Contains("-full", StringComparison.Ordinal) || variant == "fast-scan-cosine";
        bool external = variant == "product-external";
        var options = new InvertedFileOptions
        {
            ListCount = 16,
            SearchWidth = 3,
            Encoding = encoding,
            ProductCodeBytes = fastScan ? 2 : 4,
            ProductCodeLayout = fastScan ? ProductCodeLayout.FourBitFastScan : ProductCodeLayout.BytePerSubspace,
            ProductCodeRotation = variant == "product-rotated-full" ? SubspaceRotation.VarianceBalanced : SubspaceRotation.None,
            RescoreDepth = full || external ? 20 : 0,
            FullVectors = external ? FullVectorLocation.ExternalSource : FullVectorLocation.InIndexMemory,
            MaxIterations = 4,
            Seed = 5,
            MaxDegreeOfParallelism = 1,
        };
        var index = new InvertedFileIndex(Dim, metric, options);
        if (variant == "untrained")
        {
            return index;
        }

        index.Train(Data(Math.Max(256, count), seed + 1));
        if (variant == "empty")
        {
            return index;
        }

        index.AddRange(Ids(count), Data(count, seed));
        index.Remove(200);
        index.Remove(200 + (5 * 7));
        return index;
    }

    internal static void AssertSame(InvertedFileIndex saved, InvertedFileIndex mapped)
    {
        Assert.True(mapped.IsMapped);
        Assert.Equal((saved.Count, saved.Dimension, saved.Metric, saved.IsTrained, saved.CodeBytesPerVector, saved.KeepsFullVectors), (mapped.Count, mapped.Dimension, mapped.Metric, mapped.IsTrained, mapped.CodeBytesPerVector, mapped.KeepsFullVectors));
        Assert.Equal(saved.ListLengths(), mapped.ListLengths());
        Assert.Equal(saved.GetCentroids(), mapped.GetCentroids());
        MappedChecks.AssertSameStoredItems(saved, mapped, [-1, 0, 200, 235, 201, long.MaxValue, long.MinValue]);

        if (!saved.IsTrained)
        {
            return;
        }

        int d = saved.Dimension;
        float[] queries = Data(9, 77);
        bool rescores = saved.Options.RescoreDepth > 0;
        foreach (SearchOptions options in new[]
        {
            SearchOptions.Default,
            new SearchOptions { SearchWidth = 16 },
            new SearchOptions { SearchWidth = 5, Filter = id => id % 2 == 0 },
            new SearchOptions { SearchWidth = 4, RescoreDepth = rescores ? 7 : 0 },
        })
        {
            for (int q = 0; q < 9; q++)
            {
                ReadOnlySpan<float> query = queries.AsSpan(q * d, d);
                Assert.Equal(saved.Search(query, 10, options), mapped.Search(query, 10, options));
            }

            BatchSearchResults batch = mapped.SearchBatch(queries, 6, options);
            BatchSearchResults reference = saved.SearchBatch(queries, 6, options);
            for (int q = 0; q < 9; q++)
            {
                Assert.Equal(reference[q].ToArray(), batch[q].ToArray());
            }
        }
    }

    private static float[] Data(int count, int seed) => ClusteredData.Generate(count, Dim, 6, 0.4f, seed);

    private static long[] Ids(int count) => PersistenceSamples.InvertedFileIds(count);
}
