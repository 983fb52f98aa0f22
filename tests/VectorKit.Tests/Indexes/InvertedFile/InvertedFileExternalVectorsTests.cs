using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.InvertedFile;
using VectorKit.IO;
using VectorKit.Reranking;
using VectorKit.Persistence;
using VectorKit.Tests.IO;
using VectorKit.Tests.TestData;
using Xunit;

namespace VectorKit.Tests.Indexes.InvertedFile;

/// <summary>
/// Re-scoring from full vectors in a file (<see cref="FullVectorLocation.ExternalSource"/>) against the same index
/// keeping them in memory: identical hits, ids and distances bit for bit, under every metric (under cosine the file
/// holds the vectors as given, not unit length, so the index must normalise what it reads), and against the exact
/// index when every list is probed and every candidate re-scored.
/// </summary>
public sealed class InvertedFileExternalVectorsTests : IDisposable
{
    private const int D = 24, N = 700;
    private readonly string _directory = Directory.CreateTempSubdirectory("vk-external-").FullName;

    public static TheoryData<VectorEncoding, DistanceMetric, FileVectorSourceTests.Layout> Cases()
    {
        var data = new TheoryData<VectorEncoding, DistanceMetric, FileVectorSourceTests.Layout>();
        foreach (VectorEncoding storage in new[] { VectorEncoding.ProductCodes, VectorEncoding.Scalar8Bit })
        {
            foreach (DistanceMetric metric in new[] { DistanceMetric.SquaredEuclidean, DistanceMetric.InnerProduct, DistanceMetric.Cosine })
            {
                data.Add(storage, metric, metric == DistanceMetric.Cosine ? FileVectorSourceTests.Layout.Fvecs : FileVectorSourceTests.Layout.Npy);
            }
        }

        return data;
    }

    public void Dispose() => Directory.Delete(_directory, recursive: true);

    [Theory]
    [MemberData(nameof(Cases))]
    public void RescoringFromAFile_EqualsRescoringFromMemory_BitForBit(VectorEncoding storage, DistanceMetric metric, FileVectorSourceTests.Layout layout)
    {
        float[] data = ClusteredData.Generate(N, D, 15, 0.4f, seed: 21);
        float[] queries = ClusteredData.Generate(30, D, 15, 0.4f, seed: 22);
        long[] ids = Enumerable.Range(0, N).Select(i => (long)i * 31 + 5).ToArray();
        using FileVectorSource file = FileVectorSourceTests.Open(layout, FileVectorSourceTests.WriteFile(_directory, layout, data, D), D, ids);
        using InvertedFileIndex memory = Build(storage, metric, data, ids, FullVectorLocation.InIndexMemory, null);
        using InvertedFileIndex external = Build(storage, metric, data, ids, FullVectorLocation.ExternalSource, file);
        Assert.True(memory.KeepsFullVectors);
        Assert.False(external.KeepsFullVectors);
        Assert.True(external.ReadsFullVectorsExternally);
        Assert.Same(file, external.FullVectorSource);
        Assert.True(external.MemoryBytes <= memory.MemoryBytes - ((long)N * D * sizeof(float)));

        var hitsMemory = new SearchHit[10];
        var hitsExternal = new SearchHit[10];
        foreach (var options in new[] { new SearchOptions { SearchWidth = 2, RescoreDepth = 20 }, new SearchOptions { SearchWidth = 8, RescoreDepth = 200 }, new SearchOptions { SearchWidth = 3 } })
        {
            for (int q = 0; q < 30; q++)
            {
                ReadOnlySpan<float> query = queries.AsSpan(q * D, D);
                int a = memory.Search(query, hitsMemory, options);
                int b = external.Search(query, hitsExternal, options);
                Assert.Equal(hitsMemory.AsSpan(0, a).ToArray(), hitsExternal.AsSpan(0, b).ToArray());
            }

            BatchSearchResults batchMemory = memory.SearchBatch(queries, 10, options);
            BatchSearchResults batchExternal = external.SearchBatch(queries, 10, options);
            for (int q = 0; q < 30; q++)
            {
                Assert.Equal(batchMemory[q].ToArray(), batchExternal[q].ToArray());
            }
        }

        // Every list probed and every candidate re-scored: the exact index's answer, distances included.
        using var exact = new ExactIndex(D, metric);
        exact.AddRange(ids, data);
        var all = new SearchOptions { SearchWidth = 8, RescoreDepth = N };
        var expected = new SearchHit[10];
        for (int q = 0; q < 30; q++)
        {
            exact.Search(queries.AsSpan(q * D, D), expected);
            int b = external.Search(queries.AsSpan(q * D, D), hitsExternal, all);
            Assert.Equal(expected, hitsExternal.AsSpan(0, b).ToArray());
        }

        // The vector read back is the source's (unit length under cosine, as the in-memory index stores it).
        var fromMemory = new float[D];
        var fromFile = new float[D];
        Assert.True(memory.TryGetVector(ids[17], fromMemory));
        Assert.True(external.TryGetVector(ids[17], fromFile));
        Assert.Equal(fromMemory, fromFile);
    }

    [Fact]
    public void WithoutASource_RescoringSearchesThrow_ApproximateSearchesWork()
    {
        float[] data = ClusteredData.Generate(N, D, 15, 0.4f, seed: 23);
        long[] ids = Enumerable.Range(0, N).Select(i => (long)i).ToArray();
        using InvertedFileIndex index = Build(VectorEncoding.ProductCodes, DistanceMetric.SquaredEuclidean, data, ids, FullVectorLocation.ExternalSource, null);
        Assert.Null(index.FullVectorSource);
        var hits = new SearchHit[5];
        var e = Assert.Throws<InvalidOperationException>(() => index.Search(data.AsSpan(0, D), hits));
        Assert.Contains("none is attached", e.Message, StringComparison.Ordinal);
        Assert.Throws<InvalidOperationException>(() => index.SearchBatch(data.AsSpan(0, 3 * D), 5));
        Assert.Equal(5, index.Search(data.AsSpan(0, D), hits, new SearchOptions { RescoreDepth = 0 }));
        Assert.Equal(3, index.SearchBatch(data.AsSpan(0, 3 * D), 5, new SearchOptions { RescoreDepth = 0 }).QueryCount);

        // TryGetVector without a source gives the codes' reconstruction, as for an index that keeps nothing.
        Assert.True(index.TryGetVector(0, new float[D]));
    }

    [Fact]
    public void Attaching_ChecksTheSourceAndTheOptions()
    {
        float[] data = ClusteredData.Generate(N, D, 15, 0.4f, seed: 24);
        long[] ids = Enumerable.Range(0, N).Select(i => (long)i).ToArray();
        var external = new InvertedFileOptions { ListCount = 8, Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = 10, FullVectors = FullVectorLocation.ExternalSource };
        using var index = new InvertedFileIndex(D, DistanceMetric.SquaredEuclidean, external);
        Assert.Contains("have 23 components; the index dimension is 24", Assert.Throws<ArgumentException>(() => index.AttachFullVectors(new ArraySource(new float[23], 23))).Message, StringComparison.Ordinal);
        Assert.Throws<ArgumentNullException>(() => index.AttachFullVectors(null!));

        using var inMemory = new InvertedFileIndex(D, DistanceMetric.SquaredEuclidean, new InvertedFileOptions { ListCount = 8, Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = 10 });
        Assert.Throws<InvalidOperationException>(() => inMemory.AttachFullVectors(new ArraySource(data, D)));
        Assert.False(inMemory.ReadsFullVectorsExternally);
        Assert.Throws<InvalidOperationException>(() => new InvertedFileIndex(D, DistanceMetric.SquaredEuclidean, new InvertedFileOptions { Encoding = VectorEncoding.Scalar8Bit, FullVectors = FullVectorLocation.ExternalSource }, new ArraySource(data, D)));
        Assert.Throws<ArgumentOutOfRangeException>(() => new InvertedFileOptions { FullVectors = (FullVectorLocation)7 });

        // A source that lacks a candidate's vector is a clear error, not a wrong distance.
        index.Train(data);
        index.AddRange(ids, data);
        index.AttachFullVectors(new ArraySource(data.AsSpan(0, 10 * D).ToArray(), D));
        var e = Assert.Throws<InvalidOperationException>(() => index.Search(data.AsSpan(400 * D, D), new SearchHit[5]));
        Assert.Contains("has no vector for id", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void SaveAndLoad_StoresNoVectors_AndTheLoadedIndexNeedsTheSourceAgain()
    {
        float[] data = ClusteredData.Generate(N, D, 15, 0.4f, seed: 25);
        float[] queries = ClusteredData.Generate(20, D, 15, 0.4f, seed: 26);
        long[] ids = Enumerable.Range(0, N).Select(i => (long)i).ToArray();
        using FileVectorSource file = FileVectorSource.OpenRaw(FileVectorSourceTests.WriteFile(_directory, FileVectorSourceTests.Layout.Raw, data, D), D);
        using InvertedFileIndex memory = Build(VectorEncoding.ProductCodes, DistanceMetric.Cosine, data, ids, FullVectorLocation.InIndexMemory, null);
        using InvertedFileIndex external = Build(VectorEncoding.ProductCodes, DistanceMetric.Cosine, data, ids, FullVectorLocation.ExternalSource, file);
        var memoryFile = new MemoryStream();
        var externalFile = new MemoryStream();
        IndexFile.Save(memory, memoryFile);
        IndexFile.Save(external, externalFile);
        long vectorSection = (long)N * D * sizeof(float);
        Assert.InRange(memoryFile.Length - externalFile.Length, vectorSection, vectorSection + 64 + 24);

        externalFile.Position = 0;
        using InvertedFileIndex loaded = IndexFile.Load<InvertedFileIndex>(externalFile);
        Assert.Equal(FullVectorLocation.ExternalSource, loaded.Options.FullVectors);
        Assert.True(loaded.ReadsFullVectorsExternally);
        Assert.Null(loaded.FullVectorSource);
        Assert.Throws<InvalidOperationException>(() => loaded.Search(queries.AsSpan(0, D), new SearchHit[5]));
        ((IExternalFullVectors)loaded).AttachFullVectors(file);
        var options = new SearchOptions { SearchWidth = 4, RescoreDepth = 50 };
        var a = new SearchHit[10];
        var b = new SearchHit[10];
        for (int q = 0; q < 20; q++)
        {
            int n = memory.Search(queries.AsSpan(q * D, D), a, options);
            int m = loaded.Search(queries.AsSpan(q * D, D), b, options);
            Assert.Equal(a.AsSpan(0, n).ToArray(), b.AsSpan(0, m).ToArray());
        }

        // Saved again, the loaded index gives the same bytes.
        var again = new MemoryStream();
        IndexFile.Save(loaded, again);
        Assert.Equal(externalFile.ToArray(), again.ToArray());
    }

    private static InvertedFileIndex Build(VectorEncoding storage, DistanceMetric metric, float[] data, long[] ids, FullVectorLocation location, IFullVectorSource? source)
    {
        var options = new InvertedFileOptions
        {
            ListCount = 8,
            Encoding = storage,
            ProductCodeBytes = D / 4,
            RescoreDepth = 40,
            FullVectors = location,
            Seed = 9,
        };
        InvertedFileIndex index = source is null ? new InvertedFileIndex(D, metric, options) : new InvertedFileIndex(D, metric, options, source);
        index.Train(data);
        index.AddRange(ids, data);
        return index;
    }

    /// <summary>Row r of an array is id r.</summary>
    private sealed class ArraySource(float[] data, int dimension) : IFullVectorSource
    {
        public int Dimension => dimension;

        public bool TryGetVector(long id, Span<float> destination)
        {
            if (id < 0 || id >= data.Length / dimension)
            {
                return false;
            }

            data.AsSpan((int)id * dimension, dimension).CopyTo(destination);
            return true;
        }
    }
}
