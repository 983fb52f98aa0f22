using System.Buffers.Binary;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Persistence;
using VectorKit.Tests.TestData;

namespace VectorKit.Tests.Persistence;

/// <summary>The graph index under 8-bit codes, with the full vectors in the file and without them.</summary>
public partial class GoldenFileTests
{
    private static readonly float[][] GraphQueries = [[0, 0, 0], [0.5f, -0.5f, 1], [-1, 1, 0.25f]];

    [Fact]
    public void GraphIndexWith8BitCodesAndFullVectorsFixtureOfVersion1_LoadsToItsContents()
    {
        using GraphIndex built = PersistenceSamples.ScalarGraph(count: 24, dimension: 3, rescoreDepth: 4);
        byte[] fixture = Fixture("graph-scalar-v1.vkx", IndexFileBytes.Save(built));
        Assert.Equal(1u, BinaryPrimitives.ReadUInt32LittleEndian(fixture.AsSpan(8)));
        Assert.Equal(new[] { "Ids", "NodeLevels", "RemovedFlags", "BottomLinks", "UpperLinks", "ScalarRanges", "ScalarCodes", "Vectors" }, SectionNames(fixture));
        IndexHeader header = IndexFileBytes.Header(fixture);
        Assert.Equal((IndexKind.Graph, 24L, 1L, 1L, 4L), (header.Kind, header.Rows, header.Integers["vector-storage"], header.Integers["trained"], header.Integers["rescore-depth"]));
        Assert.False(header.Integers.ContainsKey("full-vector-location"));

        using var loaded = IndexFile.Load<GraphIndex>(new MemoryStream(fixture), IndexLoadOptions.Untrusted);
        Assert.Equal((22, 3, DistanceMetric.SquaredEuclidean), (loaded.Count, loaded.Dimension, loaded.Metric));
        GraphIndexOptions options = loaded.Options;
        Assert.Equal(
            (3, 16, 11, 1, VectorEncoding.Scalar8Bit, 4, FullVectorLocation.InIndexMemory),
            (options.LinksPerNode, options.BuildWidth, options.Seed, options.MaxDegreeOfParallelism, options.Encoding, options.RescoreDepth, options.FullVectors));
        Assert.Equal((true, true, false), (loaded.IsTrained, loaded.KeepsFullVectors, loaded.ReadsFullVectorsExternally));

        // The full vectors are the rows added; the two removed ids are gone.
        using ExactIndex exact = ExactOverGraphSample(loaded, out float[] data);

        // The codes in the file are the rows quantized to the trained ranges.
        Dictionary<long, double[]> decoded = DecodeGraphCodes(fixture, 3);
        AssertWithinHalfAStep(fixture, decoded, data, id => (int)((id - 500) / 3), 3);

        // A width covering the graph and re-scoring every item gives the exact neighbours (an independent index's
        // answer); without re-scoring, the code distances rank the decoded rows (a plain double loop's answer).
        var everything = new SearchOptions { SearchWidth = 64, RescoreDepth = 22 };
        var codesOnly = new SearchOptions { SearchWidth = 64, RescoreDepth = 0 };
        foreach (float[] query in GraphQueries)
        {
            Assert.Equal(exact.Search(query, 10), loaded.Search(query, 10, everything));
            AssertSameHits(NearestByLoop(decoded, query, 10), loaded.Search(query, 10, codesOnly));
        }

        AssertResavedFixture("graph-scalar-v6.vkx", 6, loaded, ["Ids", "NodeLevels", "RemovedFlags", "BottomLinks", "UpperLinks", "UpperLinkStarts", "ScalarRanges", "ScalarCodes", "Vectors", "IdOrder"], everything);
    }

    [Fact]
    public void GraphIndexWith8BitCodesOnlyFixtureOfVersion1_LoadsToItsContents()
    {
        using GraphIndex built = PersistenceSamples.ScalarGraph(count: 24, dimension: 3);
        byte[] fixture = Fixture("graph-scalar-codes-v1.vkx", IndexFileBytes.Save(built));
        Assert.Equal(1u, BinaryPrimitives.ReadUInt32LittleEndian(fixture.AsSpan(8)));
        Assert.Equal(new[] { "Ids", "NodeLevels", "RemovedFlags", "BottomLinks", "UpperLinks", "ScalarRanges", "ScalarCodes" }, SectionNames(fixture));
        IndexHeader header = IndexFileBytes.Header(fixture);
        Assert.Equal((1L, 1L), (header.Integers["vector-storage"], header.Integers["trained"]));
        Assert.False(header.Integers.ContainsKey("rescore-depth"));

        using var loaded = IndexFile.Load<GraphIndex>(new MemoryStream(fixture), IndexLoadOptions.Untrusted);
        Assert.Equal((22, 3, DistanceMetric.SquaredEuclidean), (loaded.Count, loaded.Dimension, loaded.Metric));
        GraphIndexOptions options = loaded.Options;
        Assert.Equal(
            (3, 16, 11, 1, VectorEncoding.Scalar8Bit, 0),
            (options.LinksPerNode, options.BuildWidth, options.Seed, options.MaxDegreeOfParallelism, options.Encoding, options.RescoreDepth));
        Assert.Equal((true, false), (loaded.IsTrained, loaded.KeepsFullVectors));

        // With no full vectors, an item's vector is its decoded code, within half a quantization step of the row added.
        float[] data = ClusteredData.Generate(24, 3, 4, 0.3f, 11);
        Dictionary<long, double[]> decoded = DecodeGraphCodes(fixture, 3);
        Assert.Equal(Enumerable.Range(0, 24).Select(i => 500L + (i * 3)).Where(id => id is not (500 or 509)).Order(), decoded.Keys.Order());
        AssertWithinHalfAStep(fixture, decoded, data, id => (int)((id - 500) / 3), 3);
        var row = new float[3];
        for (int i = 0; i < 24; i++)
        {
            long id = 500 + (i * 3);
            Assert.Equal(decoded.ContainsKey(id), loaded.TryGetVector(id, row));
            if (decoded.TryGetValue(id, out double[]? expected))
            {
                for (int j = 0; j < 3; j++)
                {
                    Assert.Equal(expected[j], row[j], 1e-6);
                }
            }
        }

        // A width covering the graph ranks every item by its code distance: a plain double loop over the decoded rows.
        var wide = new SearchOptions { SearchWidth = 64 };
        foreach (float[] query in GraphQueries)
        {
            AssertSameHits(NearestByLoop(decoded, query, 10), loaded.Search(query, 10, wide));
        }

        AssertResavedFixture("graph-scalar-codes-v6.vkx", 6, loaded, ["Ids", "NodeLevels", "RemovedFlags", "BottomLinks", "UpperLinks", "UpperLinkStarts", "ScalarRanges", "ScalarCodes", "IdOrder"], wide);
    }

    // Decodes the live slots' 8-bit codes straight from a graph file's sections: minimum + code × step per component.
    private static Dictionary<long, double[]> DecodeGraphCodes(byte[] file, int dimension)
    {
        long[] ids = IdSection(file);
        byte[] removed = ByteSection(file, SectionId.RemovedFlags);
        float[] ranges = FloatSection(file, SectionId.ScalarRanges);
        byte[] codes = ByteSection(file, SectionId.ScalarCodes);
        int codeLength = (dimension + 15) / 16 * 16;
        Assert.Equal((ids.Length, 2 * dimension, ids.Length * codeLength), (removed.Length, ranges.Length, codes.Length));
        var rows = new Dictionary<long, double[]>();
        for (int slot = 0; slot < ids.Length; slot++)
        {
            if (removed[slot] != 0)
            {
                continue;
            }

            var row = new double[dimension];
            for (int j = 0; j < dimension; j++)
            {
                row[j] = ranges[j] + (codes[(slot * codeLength) + j] * (double)ranges[dimension + j]);
            }

            rows.Add(ids[slot], row);
        }

        return rows;
    }

    // Trained on its own rows, the quantizer rounds each component to the nearest of 256 levels: half a step off at most.
    private static void AssertWithinHalfAStep(byte[] file, Dictionary<long, double[]> decoded, float[] data, Func<long, int> rowOf, int dimension)
    {
        float[] steps = FloatSection(file, SectionId.ScalarRanges).AsSpan(dimension).ToArray();
        Assert.All(steps, step => Assert.True(step > 0));
        foreach ((long id, double[] row) in decoded)
        {
            for (int j = 0; j < dimension; j++)
            {
                double error = Math.Abs(row[j] - data[(rowOf(id) * dimension) + j]);
                Assert.True(error <= (steps[j] / 2) + 1e-6, $"id {id}, component {j}: {error} off, step {steps[j]}");
            }
        }
    }
}
