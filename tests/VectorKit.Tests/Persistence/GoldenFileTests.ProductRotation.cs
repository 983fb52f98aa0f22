using System.Buffers.Binary;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Persistence;
using VectorKit.Quantization;
using VectorKit.Tests.TestData;

namespace VectorKit.Tests.Persistence;

/// <summary>The inverted file under product codes with the variance-balancing rotation.</summary>
public partial class GoldenFileTests
{
    [Fact]
    public void InvertedFileWithRotatedProductCodesFixtureOfVersion1_LoadsToItsContents()
    {
        // No full vectors: an item's vector and every distance come from the codes, so the rotation decides them all.
        using InvertedFileIndex built = PersistenceSamples.InvertedFile(VectorEncoding.ProductCodes, count: 20, dimension: 4, rotation: SubspaceRotation.VarianceBalanced, productCodeBytes: 2);
        byte[] fixture = Fixture("ivf-product-rotation-v1.vkx", IndexFileBytes.Save(built));
        Assert.Equal(1u, BinaryPrimitives.ReadUInt32LittleEndian(fixture.AsSpan(8)));
        Assert.Equal(new[] { "Centroids", "ProductCodebooks", "ProductRotation", "ListLengths", "Ids", "ListCodes" }, SectionNames(fixture));
        IndexHeader header = IndexFileBytes.Header(fixture);
        Assert.Equal(
            (IndexKind.InvertedFile, 1L, 2L, 1L, 0L),
            (header.Kind, header.Integers["list-storage"], header.Integers["product-code-bytes"], header.Integers["product-rotation"], header.Integers["rescore-depth"]));

        using var loaded = IndexFile.Load<InvertedFileIndex>(new MemoryStream(fixture), IndexLoadOptions.Untrusted);
        Assert.Equal((18, 4, DistanceMetric.SquaredEuclidean, true), (loaded.Count, loaded.Dimension, loaded.Metric, loaded.IsTrained));
        InvertedFileOptions options = loaded.Options;
        Assert.Equal(
            (4, 2, VectorEncoding.ProductCodes, 2, SubspaceRotation.VarianceBalanced, 0, 3, 13, 1),
            (options.ListCount, options.SearchWidth, options.Encoding, options.ProductCodeBytes, options.ProductCodeRotation, options.RescoreDepth, options.MaxIterations, options.Seed, options.MaxDegreeOfParallelism));
        Assert.Equal((false, 2), (loaded.KeepsFullVectors, loaded.CodeBytesPerVector));
        Assert.Equal(FloatSection(fixture, SectionId.Centroids), loaded.GetCentroids().ToArray());

        // The stored rotation is orthogonal and really turns the space (not a signed permutation of the axes).
        float[] rotation = FloatSection(fixture, SectionId.ProductRotation);
        Assert.Equal(16, rotation.Length);
        for (int a = 0; a < 4; a++)
        {
            for (int b = 0; b < 4; b++)
            {
                double dot = 0;
                for (int j = 0; j < 4; j++)
                {
                    dot += (double)rotation[(a * 4) + j] * rotation[(b * 4) + j];
                }

                Assert.Equal(a == b ? 1.0 : 0.0, dot, 1e-5);
            }
        }

        Assert.Contains(rotation, r => Math.Abs(r) is > 0.05f and < 0.95f);

        // Every entry decoded straight from the sections: centroid + Rᵀ · (the codewords its code names).
        List<ProductEntry> entries = DecodeRotatedProductCodes(fixture, 4, 2);
        Dictionary<long, double[]> decoded = entries.ToDictionary(e => e.Id, e => e.Decoded);
        long[] ids = PersistenceSamples.InvertedFileIds(20);
        Assert.Equal(ids.Where(id => id is not (200 or 235)).Order(), decoded.Keys.Order());
        var row = new float[4];
        foreach (long id in ids)
        {
            Assert.Equal(decoded.ContainsKey(id), loaded.TryGetVector(id, row));
            if (decoded.TryGetValue(id, out double[]? expected))
            {
                for (int j = 0; j < 4; j++)
                {
                    Assert.Equal(expected[j], row[j], 1e-5);
                }
            }
        }

        // The codes are those of the rows added: each entry sits in the list of its nearest centroid, and its code names,
        // per sub-space, the nearest codeword to R·(x − centroid) (a plain loop over all 256).
        float[] data = ClusteredData.Generate(20, 4, 4, 0.3f, 13);
        float[] centroids = FloatSection(fixture, SectionId.Centroids);
        float[] codebooks = FloatSection(fixture, SectionId.ProductCodebooks);
        foreach (ProductEntry entry in entries)
        {
            int r = Array.IndexOf(ids, entry.Id);
            var residual = new double[4];
            double[] toCentroid = new double[4];
            for (int list = 0; list < 4; list++)
            {
                for (int j = 0; j < 4; j++)
                {
                    double difference = data[(r * 4) + j] - centroids[(list * 4) + j];
                    toCentroid[list] += difference * difference;
                    if (list == entry.List)
                    {
                        residual[j] = difference;
                    }
                }
            }

            Assert.True(toCentroid[entry.List] <= toCentroid.Min() + 1e-6, $"id {entry.Id} is in list {entry.List}, not its nearest");
            for (int s = 0; s < 2; s++)
            {
                var distances = new double[256];
                for (int w = 0; w < 256; w++)
                {
                    for (int t = 0; t < 2; t++)
                    {
                        double rotated = 0;
                        for (int j = 0; j < 4; j++)
                        {
                            rotated += rotation[(((s * 2) + t) * 4) + j] * residual[j];
                        }

                        double difference = rotated - codebooks[(((s * 256) + w) * 2) + t];
                        distances[w] += difference * difference;
                    }
                }

                Assert.True(distances[entry.Code[s]] <= distances.Min() + 1e-6, $"id {entry.Id}, sub-space {s}: codeword {entry.Code[s]} is not the nearest");
            }
        }

        // Probing every list ranks every entry by its code distance, |R·(q − c) − codewords|² = |q − decoded|² (R is
        // orthogonal): a plain double loop over the decoded rows.
        var everyList = new SearchOptions { SearchWidth = 4 };
        foreach (float[] query in new[] { new float[] { 0, 0, 0, 0 }, [0.5f, -0.5f, 1, 0], [-1, 1, 0.25f, 0.5f] })
        {
            AssertSameHits(NearestByLoop(decoded, query, 10), loaded.Search(query, 10, everyList));
        }

        AssertVersion4("ivf-product-rotation-v4.vkx", loaded, ["Centroids", "ProductCodebooks", "ProductRotation", "ListLengths", "Ids", "ListCodes", "IdOrder"], everyList);
    }

    // Entries are stored list after list (ids and codes alike); a code holds one codeword number per sub-space.
    private static List<ProductEntry> DecodeRotatedProductCodes(byte[] file, int dimension, int subspaces)
    {
        float[] centroids = FloatSection(file, SectionId.Centroids);
        float[] codebooks = FloatSection(file, SectionId.ProductCodebooks);
        float[] rotation = FloatSection(file, SectionId.ProductRotation);
        byte[] lengthBytes = ByteSection(file, SectionId.ListLengths);
        long[] ids = IdSection(file);
        byte[] codes = ByteSection(file, SectionId.ListCodes);
        int width = dimension / subspaces;
        Assert.Equal((subspaces * 256 * width, ids.Length * subspaces), (codebooks.Length, codes.Length));

        var entries = new List<ProductEntry>();
        int entry = 0;
        for (int list = 0; list < lengthBytes.Length / sizeof(int); list++)
        {
            int length = BinaryPrimitives.ReadInt32LittleEndian(lengthBytes.AsSpan(list * sizeof(int)));
            for (int n = 0; n < length; n++, entry++)
            {
                var rotated = new double[dimension];
                for (int s = 0; s < subspaces; s++)
                {
                    int codeword = codes[(entry * subspaces) + s];
                    for (int t = 0; t < width; t++)
                    {
                        rotated[(s * width) + t] = codebooks[(((s * 256) + codeword) * width) + t];
                    }
                }

                var row = new double[dimension];
                for (int i = 0; i < dimension; i++)
                {
                    double sum = centroids[(list * dimension) + i];
                    for (int j = 0; j < dimension; j++)
                    {
                        sum += rotation[(j * dimension) + i] * rotated[j];
                    }

                    row[i] = sum;
                }

                entries.Add(new ProductEntry(ids[entry], list, codes.AsSpan(entry * subspaces, subspaces).ToArray(), row));
            }
        }

        Assert.Equal(ids.Length, entry);
        return entries;
    }

    private sealed record ProductEntry(long Id, int List, byte[] Code, double[] Decoded);
}
