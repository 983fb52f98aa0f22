using System.Buffers.Binary;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Persistence;
using VectorKit.Tests.TestData;

namespace VectorKit.Tests.Persistence;

/// <summary>
/// The inverted file under the four-bit fast-scan product-code layout, re-scoring from full vectors in the file. Written
/// as version 1 (no tuned defaults): the layout is an optional header field and a new non-skippable section, so an older
/// reader stops at that section instead of misreading codes.
/// </summary>
public partial class GoldenFileTests
{
    [Fact]
    public void InvertedFileWithFastScanCodesFixtureOfVersion1_LoadsToItsContents()
    {
        using InvertedFileIndex built = PersistenceSamples.InvertedFile(VectorEncoding.ProductCodes, count: 20, dimension: 4, rescoreDepth: 8, productCodeBytes: 1, layout: ProductCodeLayout.FourBitFastScan);
        byte[] fixture = Fixture("ivf-fast-scan-v1.vkx", IndexFileBytes.Save(built));
        Assert.Equal(1u, BinaryPrimitives.ReadUInt32LittleEndian(fixture.AsSpan(8)));
        Assert.Equal(new[] { "Centroids", "FourBitCodebooks", "ListLengths", "Ids", "ListCodes", "Vectors" }, SectionNames(fixture));
        IndexHeader header = IndexFileBytes.Header(fixture);
        Assert.Equal(
            (IndexKind.InvertedFile, 1L, 1L, 1L, 8L),
            (header.Kind, header.Integers["list-storage"], header.Integers["product-code-bytes"], header.Integers["product-code-layout"], header.Integers["rescore-depth"]));

        using var loaded = IndexFile.Load<InvertedFileIndex>(new MemoryStream(fixture), IndexLoadOptions.Untrusted);
        Assert.Equal((18, 4, DistanceMetric.SquaredEuclidean, true), (loaded.Count, loaded.Dimension, loaded.Metric, loaded.IsTrained));
        Assert.Equal((VectorEncoding.ProductCodes, ProductCodeLayout.FourBitFastScan, 1, 8), (loaded.Options.Encoding, loaded.Options.ProductCodeLayout, loaded.Options.ProductCodeBytes, loaded.Options.RescoreDepth));
        Assert.Equal((true, 1), (loaded.KeepsFullVectors, loaded.CodeBytesPerVector));

        // Two sub-spaces of two components, 16 codewords each; one code byte per entry, sub-space 0 in the low nibble.
        float[] centroids = FloatSection(fixture, SectionId.Centroids);
        float[] codebooks = FloatSection(fixture, SectionId.FourBitCodebooks);
        float[] vectors = FloatSection(fixture, SectionId.Vectors);
        byte[] codes = ByteSection(fixture, SectionId.ListCodes);
        byte[] lengthBytes = ByteSection(fixture, SectionId.ListLengths);
        long[] ids = IdSection(fixture);
        Assert.Equal((2 * 16 * 2, 18, 18 * 4), (codebooks.Length, codes.Length, vectors.Length));
        var rows = new Dictionary<long, double[]>();
        int entry = 0;
        for (int list = 0; list < 4; list++)
        {
            int length = BinaryPrimitives.ReadInt32LittleEndian(lengthBytes.AsSpan(list * sizeof(int)));
            for (int n = 0; n < length; n++, entry++)
            {
                double[] row = vectors.AsSpan(entry * 4, 4).ToArray().Select(x => (double)x).ToArray();
                rows[ids[entry]] = row;
                for (int s = 0; s < 2; s++)
                {
                    int code = s == 0 ? codes[entry] & 15 : codes[entry] >> 4;
                    var distances = new double[16];
                    for (int w = 0; w < 16; w++)
                    {
                        for (int t = 0; t < 2; t++)
                        {
                            double difference = row[(s * 2) + t] - centroids[(list * 4) + (s * 2) + t] - codebooks[(((s * 16) + w) * 2) + t];
                            distances[w] += difference * difference;
                        }
                    }

                    Assert.True(distances[code] <= distances.Min() + 1e-6, $"id {ids[entry]}, sub-space {s}: codeword {code} is not the nearest");
                }
            }
        }

        Assert.Equal(18, entry);
        var row4 = new float[4];
        foreach ((long id, double[] expected) in rows)
        {
            Assert.True(loaded.TryGetVector(id, row4));
            Assert.Equal(expected, row4.Select(x => (double)x).ToArray());
        }

        // Every list probed and 8 candidates re-scored: the best 5 exactly, against a plain loop over the stored rows.
        var everyList = new SearchOptions { SearchWidth = 4 };
        foreach (float[] query in new[] { new float[] { 0, 0, 0, 0 }, [0.5f, -0.5f, 1, 0], [-1, 1, 0.25f, 0.5f] })
        {
            AssertSameHits(NearestByLoop(rows, query, 5), loaded.Search(query, 5, everyList));
        }

        AssertVersion4("ivf-fast-scan-v4.vkx", loaded, ["Centroids", "FourBitCodebooks", "ListLengths", "Ids", "FastScanBlocks", "Vectors", "IdOrder"], everyList);
    }
}
