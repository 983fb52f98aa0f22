using System.Buffers.Binary;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Persistence;
using VectorKit.Tests.TestData;

namespace VectorKit.Tests.Persistence;

/// <summary>
/// Compressed indexes whose full vectors live outside them (<see cref="FullVectorLocation.ExternalSource"/>): the file
/// holds no vectors, loads without a source, and re-scores once the caller's rows are attached.
/// </summary>
public partial class GoldenFileTests
{
    [Fact]
    public void ExactIndexWith8BitStorageAndExternalFullVectorsFixtureOfVersion1_LoadsToItsContents()
    {
        using ExactIndex built = PersistenceSamples.ExactScalar(count: 8, dimension: 3, metric: DistanceMetric.InnerProduct, rescoreDepth: 4, fullVectors: FullVectorLocation.ExternalSource);
        byte[] fixture = Fixture("exact-scalar-external-v1.vkx", IndexFileBytes.Save(built));
        Assert.Equal(1u, BinaryPrimitives.ReadUInt32LittleEndian(fixture.AsSpan(8)));
        Assert.Equal(new[] { "Ids", "ScalarRanges", "ScalarCodes" }, SectionNames(fixture));
        IndexHeader header = IndexFileBytes.Header(fixture);
        Assert.Equal((IndexKind.Exact, 1L, 4L, 1L), (header.Kind, header.Integers["vector-storage"], header.Integers["rescore-depth"], header.Integers["full-vector-location"]));

        using var loaded = IndexFile.Load<ExactIndex>(new MemoryStream(fixture), IndexLoadOptions.Untrusted);
        Assert.Equal((7, 3, DistanceMetric.InnerProduct), (loaded.Count, loaded.Dimension, loaded.Metric));
        Assert.Equal((VectorEncoding.Scalar8Bit, 4, FullVectorLocation.ExternalSource), (loaded.Options.Encoding, loaded.Options.RescoreDepth, loaded.Options.FullVectors));
        Assert.Equal((true, false, true), (loaded.IsTrained, loaded.KeepsFullVectors, loaded.ReadsFullVectorsExternally));
        Assert.Null(loaded.FullVectorSource);
        AssertNeedsASource(() => loaded.Search(new float[] { 1, 0, 0 }, 3));

        // The caller's store holds every row added (the removed one too); the index reads the ones it keeps.
        float[] data = ClusteredData.Generate(8, 3, 3, 0.3f, 7);
        long[] ids = Enumerable.Range(0, 8).Select(i => 1000L + (i * 7)).ToArray();
        using (FullVectorSources.Open(FullVectorSourceKind.InMemory, string.Empty, data, ids, 3, out IFullVectorSource source))
        {
            loaded.AttachFullVectors(source);
        }

        using var exact = new ExactIndex(3, DistanceMetric.InnerProduct);
        var row = new float[3];
        for (int i = 0; i < 8; i++)
        {
            bool removed = ids[i] == 1007;
            Assert.Equal(!removed, loaded.TryGetVector(ids[i], row));
            if (!removed)
            {
                Assert.Equal(data.AsSpan(i * 3, 3).ToArray(), row);
                exact.Add(ids[i], row);
            }
        }

        // Re-scoring every item from the source gives the answer of a float32 exact index over the same rows.
        var everything = new SearchOptions { RescoreDepth = 7 };
        foreach (float[] query in new[] { new float[] { 1, 0, 0 }, [0.5f, -0.5f, 1], [-1, 1, 0.25f] })
        {
            Assert.Equal(exact.Search(query, 5), loaded.Search(query, 5, everything));
        }

        // The source is the caller's: saving after attaching writes the same bytes.
        byte[] resaved = IndexFileBytes.Save(loaded);
        Assert.Equal(Fixture("exact-scalar-external-v3.vkx", resaved), resaved);
    }

    [Fact]
    public void GraphIndexWith8BitCodesAndExternalFullVectorsFixtureOfVersion1_LoadsToItsContents()
    {
        using GraphIndex built = PersistenceSamples.ScalarGraph(count: 24, dimension: 3, metric: DistanceMetric.Cosine, rescoreDepth: 5, fullVectors: FullVectorLocation.ExternalSource);
        byte[] fixture = Fixture("graph-scalar-external-v1.vkx", IndexFileBytes.Save(built));
        Assert.Equal(1u, BinaryPrimitives.ReadUInt32LittleEndian(fixture.AsSpan(8)));
        Assert.Equal(new[] { "Ids", "NodeLevels", "RemovedFlags", "BottomLinks", "UpperLinks", "ScalarRanges", "ScalarCodes" }, SectionNames(fixture));
        IndexHeader header = IndexFileBytes.Header(fixture);
        Assert.Equal((IndexKind.Graph, 1L, 5L, 1L), (header.Kind, header.Integers["vector-storage"], header.Integers["rescore-depth"], header.Integers["full-vector-location"]));

        using var loaded = IndexFile.Load<GraphIndex>(new MemoryStream(fixture), IndexLoadOptions.Untrusted);
        Assert.Equal((22, 3, DistanceMetric.Cosine), (loaded.Count, loaded.Dimension, loaded.Metric));
        GraphIndexOptions options = loaded.Options;
        Assert.Equal(
            (3, 16, 11, 1, VectorEncoding.Scalar8Bit, 5, FullVectorLocation.ExternalSource),
            (options.LinksPerNode, options.BuildWidth, options.Seed, options.MaxDegreeOfParallelism, options.Encoding, options.RescoreDepth, options.FullVectors));
        Assert.Equal((true, false, true), (loaded.IsTrained, loaded.KeepsFullVectors, loaded.ReadsFullVectorsExternally));
        Assert.Null(loaded.FullVectorSource);
        AssertNeedsASource(() => loaded.Search(new float[] { 0.5f, -0.5f, 1 }, 3));

        // The source holds the rows as given; under cosine the index reads them at unit length, as a float32 exact
        // index stores them.
        float[] data = ClusteredData.Generate(24, 3, 4, 0.3f, 11);
        long[] ids = Enumerable.Range(0, 24).Select(i => 500L + (i * 3)).ToArray();
        using (FullVectorSources.Open(FullVectorSourceKind.InMemory, string.Empty, data, ids, 3, out IFullVectorSource source))
        {
            loaded.AttachFullVectors(source);
        }

        using var exact = new ExactIndex(3, DistanceMetric.Cosine);
        var row = new float[3];
        var unit = new float[3];
        for (int i = 0; i < 24; i++)
        {
            bool removed = ids[i] is 500 or 509;
            Assert.Equal(!removed, loaded.TryGetVector(ids[i], row));
            if (!removed)
            {
                exact.Add(ids[i], data.AsSpan(i * 3, 3));
                Assert.True(exact.TryGetVector(ids[i], unit));
                Assert.Equal(unit, row);
            }
        }

        // A width covering the graph and re-scoring every item from the source gives the exact neighbours.
        var everything = new SearchOptions { SearchWidth = 64, RescoreDepth = 22 };
        foreach (float[] query in new[] { new float[] { 1, 0.25f, -0.5f }, [0.5f, -0.5f, 1], [-1, 1, 0.25f] })
        {
            Assert.Equal(exact.Search(query, 10), loaded.Search(query, 10, everything));
        }

        using (FullVectorSources.Open(FullVectorSourceKind.InMemory, string.Empty, data, ids, 3, out IFullVectorSource again))
        {
            AssertResavedFixture("graph-scalar-external-v6.vkx", 6, loaded, ["Ids", "NodeLevels", "RemovedFlags", "BottomLinks", "UpperLinks", "UpperLinkStarts", "ScalarRanges", "ScalarCodes", "IdOrder"], everything, again);
        }
    }

    [Fact]
    public void InvertedFileWithProductCodesAndExternalFullVectorsFixtureOfVersion1_LoadsToItsContents()
    {
        using InvertedFileIndex built = PersistenceSamples.InvertedFile(VectorEncoding.ProductCodes, count: 20, dimension: 4, rescoreDepth: 6, fullVectors: FullVectorLocation.ExternalSource, productCodeBytes: 2);
        byte[] fixture = Fixture("ivf-external-v1.vkx", IndexFileBytes.Save(built));
        Assert.Equal(1u, BinaryPrimitives.ReadUInt32LittleEndian(fixture.AsSpan(8)));
        Assert.Equal(new[] { "Centroids", "ProductCodebooks", "ListLengths", "Ids", "ListCodes" }, SectionNames(fixture));
        IndexHeader header = IndexFileBytes.Header(fixture);
        Assert.Equal(
            (IndexKind.InvertedFile, 1L, 2L, 6L, 1L),
            (header.Kind, header.Integers["list-storage"], header.Integers["product-code-bytes"], header.Integers["rescore-depth"], header.Integers["full-vector-location"]));
        Assert.False(header.Integers.ContainsKey("product-rotation"));

        using var loaded = IndexFile.Load<InvertedFileIndex>(new MemoryStream(fixture), IndexLoadOptions.Untrusted);
        Assert.Equal((18, 4, DistanceMetric.SquaredEuclidean, true), (loaded.Count, loaded.Dimension, loaded.Metric, loaded.IsTrained));
        InvertedFileOptions options = loaded.Options;
        Assert.Equal(
            (4, 2, VectorEncoding.ProductCodes, 2, 6, FullVectorLocation.ExternalSource, 3, 13, 1),
            (options.ListCount, options.SearchWidth, options.Encoding, options.ProductCodeBytes, options.RescoreDepth, options.FullVectors, options.MaxIterations, options.Seed, options.MaxDegreeOfParallelism));
        Assert.Equal((false, true, 2), (loaded.KeepsFullVectors, loaded.ReadsFullVectorsExternally, loaded.CodeBytesPerVector));
        Assert.Equal(18, loaded.ListLengths().Sum());
        Assert.Null(loaded.FullVectorSource);
        AssertNeedsASource(() => loaded.Search(new float[] { 0, 0, 0, 0 }, 3));

        // The full vectors come from a .npy file holding every row added, row r being id 200 + 5r.
        float[] data = ClusteredData.Generate(20, 4, 4, 0.3f, 13);
        long[] ids = PersistenceSamples.InvertedFileIds(20);
        string directory = Directory.CreateTempSubdirectory("vk-golden-").FullName;
        try
        {
            using var source = FullVectorSources.WriteNpy(directory, data, ids, 4);
            loaded.AttachFullVectors(source);
            using var exact = new ExactIndex(4, DistanceMetric.SquaredEuclidean);
            var row = new float[4];
            for (int i = 0; i < 20; i++)
            {
                bool removed = ids[i] is 200 or 235;
                Assert.Equal(!removed, loaded.TryGetVector(ids[i], row));
                if (!removed)
                {
                    Assert.Equal(data.AsSpan(i * 4, 4).ToArray(), row);
                    exact.Add(ids[i], row);
                }
            }

            // Probing every list and re-scoring every entry from the file gives the exact neighbours.
            var everything = new SearchOptions { SearchWidth = 4, RescoreDepth = 18 };
            foreach (float[] query in new[] { new float[] { 0, 0, 0, 0 }, [0.5f, -0.5f, 1, 0], [-1, 1, 0.25f, 0.5f] })
            {
                Assert.Equal(exact.Search(query, 10), loaded.Search(query, 10, everything));
            }

            AssertVersion4("ivf-external-v4.vkx", loaded, ["Centroids", "ProductCodebooks", "ListLengths", "Ids", "ListCodes", "IdOrder"], everything, source);
        }
        finally
        {
            Directory.Delete(directory, recursive: true);
        }
    }

    private static void AssertNeedsASource(Action search)
    {
        var e = Assert.Throws<InvalidOperationException>(search);
        Assert.Contains("none is attached", e.Message, StringComparison.Ordinal);
    }
}
