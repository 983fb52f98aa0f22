using System.Buffers.Binary;
using System.Runtime.CompilerServices;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Persistence;
using VectorKit.Tests.TestData;

namespace VectorKit.Tests.Persistence;

/// <summary>
/// Files of format version 1 kept as fixtures (Persistence/Fixtures): every later library must still load them to the
/// same contents. Regenerate only when adding the fixtures of a new version, with
/// <c>VECTORKIT_WRITE_STORAGE_FIXTURES=1</c>; a version's fixture is never rewritten once committed.
/// </summary>
public partial class GoldenFileTests
{
    [Fact]
    public void ExactIndexFixtureOfVersion1_LoadsToItsContents_AndTodaysWriterStillProducesItsBytes()
    {
        using ExactIndex expected = PersistenceSamples.Exact(count: 6, dimension: 3);
        byte[] today = IndexFileBytes.Save(expected);
        byte[] fixture = Fixture("exact-v1.vkx", today);
        Assert.Equal(1u, BinaryPrimitives.ReadUInt32LittleEndian(fixture.AsSpan(8)));

        using var loaded = IndexFile.Load<ExactIndex>(new MemoryStream(fixture), IndexLoadOptions.Untrusted);
        Assert.Equal((6, 3, DistanceMetric.SquaredEuclidean), (loaded.Count, loaded.Dimension, loaded.Metric));
        float[] data = ClusteredData.Generate(6, 3, 3, 0.3f, 7);
        var row = new float[3];
        for (int i = 0; i < 6; i++)
        {
            Assert.True(loaded.TryGetVector(1000 + (i * 7), row));
            Assert.Equal(data.AsSpan(i * 3, 3).ToArray(), row);
        }

        // Today's writer adds the id order (format version 3); the version-1 fixture still loads, as above.
        byte[] current = Fixture("exact-v3.vkx", today);
        Assert.Equal(3u, BinaryPrimitives.ReadUInt32LittleEndian(current.AsSpan(8)));
        Assert.Equal(new[] { "Ids", "Vectors", "IdOrder" }, SectionNames(current));
        Assert.Equal(current, today);
    }

    [Fact]
    public void ExactIndexWith8BitStorageFixtureOfVersion1_LoadsToItsContents()
    {
        // Cosine with the full vectors kept: every part of the variant (ranges, codes, unit vectors) is in it.
        using ExactIndex built = PersistenceSamples.ExactScalar(count: 8, dimension: 3, metric: DistanceMetric.Cosine, rescoreDepth: 4);
        byte[] fixture = Fixture("exact-scalar-v1.vkx", IndexFileBytes.Save(built));
        Assert.Equal(1u, BinaryPrimitives.ReadUInt32LittleEndian(fixture.AsSpan(8)));

        using var loaded = IndexFile.Load<ExactIndex>(new MemoryStream(fixture), IndexLoadOptions.Untrusted);
        Assert.Equal((7, 3, DistanceMetric.Cosine), (loaded.Count, loaded.Dimension, loaded.Metric));
        Assert.Equal((VectorEncoding.Scalar8Bit, 4, true, true), (loaded.Options.Encoding, loaded.Options.RescoreDepth, loaded.KeepsFullVectors, loaded.IsTrained));

        // The full vectors are the rows added, at unit length; the removed id is gone. Re-scoring every item gives the
        // answer of a float32 exact index over the same rows (an independent index's answer).
        float[] data = ClusteredData.Generate(8, 3, 3, 0.3f, 7);
        using var exact = new ExactIndex(3, DistanceMetric.Cosine);
        var row = new float[3];
        for (int i = 0; i < 8; i++)
        {
            long id = 1000 + (i * 7);
            Assert.Equal(id != 1007, loaded.TryGetVector(id, row));
            if (id != 1007)
            {
                exact.Add(id, data.AsSpan(i * 3, 3));
                var unit = new float[3];
                Assert.True(exact.TryGetVector(id, unit));
                Assert.Equal(unit, row);
            }
        }

        var everything = new SearchOptions { RescoreDepth = 7 };
        foreach (float[] query in new[] { new float[] { 1, 0, 0 }, [0.5f, -0.5f, 1], [-1, 1, 0.25f] })
        {
            Assert.Equal(exact.Search(query, 5), loaded.Search(query, 5, everything));
        }

        byte[] resaved = IndexFileBytes.Save(loaded);
        Assert.Equal(Fixture("exact-scalar-v3.vkx", resaved), resaved);
    }

    [Fact]
    public void GraphIndexFixtureOfVersion1_LoadsToItsContents()
    {
        using GraphIndex built = PersistenceSamples.Graph(count: 24, dimension: 3);
        byte[] fixture = Fixture("graph-v1.vkx", IndexFileBytes.Save(built));
        Assert.Equal(1u, BinaryPrimitives.ReadUInt32LittleEndian(fixture.AsSpan(8)));

        using var loaded = IndexFile.Load<GraphIndex>(new MemoryStream(fixture), IndexLoadOptions.Untrusted);
        Assert.Equal((22, 3, DistanceMetric.SquaredEuclidean), (loaded.Count, loaded.Dimension, loaded.Metric));
        Assert.Equal((3, 16, 11, 1), (loaded.Options.LinksPerNode, loaded.Options.BuildWidth, loaded.Options.Seed, loaded.Options.MaxDegreeOfParallelism));
        using ExactIndex exact = ExactOverGraphSample(loaded, out _);

        // A width covering the graph finds the exact neighbours: the stored links reach every item.
        var wide = new SearchOptions { SearchWidth = 64 };
        foreach (float[] query in new[] { new float[] { 0, 0, 0 }, [0.5f, -0.5f, 1], [-1, 1, 0.25f] })
        {
            Assert.Equal(exact.Search(query, 10), loaded.Search(query, 10, wide));
        }

        // Today's writer adds the id order of the live slots (format version 5) and the upper-layer starts (6).
        AssertResavedFixture("graph-v6.vkx", 6, loaded, ["Ids", "NodeLevels", "RemovedFlags", "BottomLinks", "UpperLinks", "UpperLinkStarts", "Vectors", "IdOrder"], wide);
    }

    [Fact]
    public void InvertedFileFixtureOfVersion1_LoadsToItsContents()
    {
        // 8-bit codes with full vectors kept: every part of the kind (centroids, ranges, lists, ids, vectors) is in it.
        using InvertedFileIndex built = PersistenceSamples.InvertedFile(VectorEncoding.Scalar8Bit, count: 20, rescoreDepth: 6);
        byte[] fixture = Fixture("ivf-v1.vkx", IndexFileBytes.Save(built));
        Assert.Equal(1u, BinaryPrimitives.ReadUInt32LittleEndian(fixture.AsSpan(8)));
        Assert.Equal((uint)IndexKind.InvertedFile, (uint)IndexFileBytes.Header(fixture).Kind);

        using var loaded = IndexFile.Load<InvertedFileIndex>(new MemoryStream(fixture), IndexLoadOptions.Untrusted);
        Assert.Equal((18, 3, DistanceMetric.SquaredEuclidean, true), (loaded.Count, loaded.Dimension, loaded.Metric, loaded.IsTrained));
        InvertedFileOptions options = loaded.Options;
        Assert.Equal((4, 2, VectorEncoding.Scalar8Bit, 6, 3, 13, 1), (options.ListCount, options.SearchWidth, options.Encoding, options.RescoreDepth, options.MaxIterations, options.Seed, options.MaxDegreeOfParallelism));
        Assert.True(loaded.KeepsFullVectors);
        Assert.Equal(18, loaded.ListLengths().Sum());
        Assert.Equal(12, loaded.GetCentroids().Length);

        // The full vectors are the rows added; the two removed ids are gone.
        float[] data = ClusteredData.Generate(20, 3, 4, 0.3f, 13);
        using var exact = new ExactIndex(3, DistanceMetric.SquaredEuclidean);
        var row = new float[3];
        for (int i = 0; i < 20; i++)
        {
            long id = 200 + (5 * i);
            bool removed = id is 200 or 235;
            Assert.Equal(!removed, loaded.TryGetVector(id, row));
            if (!removed)
            {
                Assert.Equal(data.AsSpan(i * 3, 3).ToArray(), row);
                exact.Add(id, row);
            }
        }

        // Probing every list and re-scoring every entry gives the exact neighbours (an independent index's answer).
        var everything = new SearchOptions { SearchWidth = 4, RescoreDepth = 18 };
        foreach (float[] query in new[] { new float[] { 0, 0, 0 }, [0.5f, -0.5f, 1], [-1, 1, 0.25f] })
        {
            Assert.Equal(exact.Search(query, 10), loaded.Search(query, 10, everything));
        }

        AssertVersion4("ivf-v4.vkx", loaded, ["Centroids", "ScalarRanges", "ListLengths", "Ids", "ListCodes", "Vectors", "IdOrder"], everything);
    }

    // Reads a committed fixture; writes it first only when asked to (new format versions add new fixtures).
    private static byte[] Fixture(string name, byte[] current, [CallerFilePath] string source = "")
    {
        if (Environment.GetEnvironmentVariable("VECTORKIT_WRITE_STORAGE_FIXTURES") == "1")
        {
            File.WriteAllBytes(Path.Combine(Path.GetDirectoryName(source)!, "Fixtures", name), current);
        }

        return File.ReadAllBytes(Path.Combine(AppContext.BaseDirectory, "Persistence", "Fixtures", name));
    }

    // The sections of a file in order, read from its frames (IndexFileBytes re-implements the layout).
    private static string[] SectionNames(byte[] file) => IndexFileBytes.Map(file).Select(s => s.Name).ToArray();

    // One section's payload as little-endian float32 values.
    private static float[] FloatSection(byte[] file, SectionId id)
    {
        byte[] payload = ByteSection(file, id);
        var values = new float[payload.Length / sizeof(float)];
        for (int i = 0; i < values.Length; i++)
        {
            values[i] = BinaryPrimitives.ReadSingleLittleEndian(payload.AsSpan(i * sizeof(float)));
        }

        return values;
    }

    private static byte[] ByteSection(byte[] file, SectionId id)
    {
        SectionSpan section = IndexFileBytes.Map(file).Single(s => s.Id == (uint)id);
        return file.AsSpan((int)section.PayloadStart, (int)section.Length).ToArray();
    }

    private static long[] IdSection(byte[] file)
    {
        byte[] payload = ByteSection(file, SectionId.Ids);
        var ids = new long[payload.Length / sizeof(long)];
        for (int i = 0; i < ids.Length; i++)
        {
            ids[i] = BinaryPrimitives.ReadInt64LittleEndian(payload.AsSpan(i * sizeof(long)));
        }

        return ids;
    }

    // The k nearest of the rows by squared Euclidean distance in double precision, ties by ascending id.
    private static (long Id, double Distance)[] NearestByLoop(IReadOnlyDictionary<long, double[]> rows, float[] query, int k)
    {
        var all = new List<(long Id, double Distance)>();
        foreach ((long id, double[] row) in rows)
        {
            double sum = 0;
            for (int j = 0; j < row.Length; j++)
            {
                double difference = query[j] - row[j];
                sum += difference * difference;
            }

            all.Add((id, sum));
        }

        return all.OrderBy(h => h.Distance).ThenBy(h => h.Id).Take(k).ToArray();
    }

    // Same ids in the same order, distances equal up to float rounding of the index's own kernel.
    private static void AssertSameHits((long Id, double Distance)[] expected, SearchHit[] actual)
    {
        Assert.Equal(expected.Select(h => h.Id), actual.Select(h => h.Id));
        for (int i = 0; i < expected.Length; i++)
        {
            Assert.True(
                Math.Abs(expected[i].Distance - actual[i].Distance) <= 1e-5 * (1 + expected[i].Distance),
                $"hit {i} (id {expected[i].Id}): expected distance {expected[i].Distance}, found {actual[i].Distance}");
        }
    }

    /// <summary>
    /// Checks that a loaded graph fixture built from <see cref="PersistenceSamples.Graph"/> (24 rows, ids 500 + 3i, ids
    /// 500 and 509 removed) holds the sample's rows, and returns an exact index over the live ones as the reference.
    /// </summary>
    private static ExactIndex ExactOverGraphSample(GraphIndex loaded, out float[] data)
    {
        data = ClusteredData.Generate(24, 3, 4, 0.3f, 11);
        var exact = new ExactIndex(3, DistanceMetric.SquaredEuclidean);
        var row = new float[3];
        for (int i = 0; i < 24; i++)
        {
            long id = 500 + (i * 3);
            bool removed = id is 500 or 509;
            Assert.Equal(!removed, loaded.TryGetVector(id, row));
            if (!removed)
            {
                Assert.Equal(data.AsSpan(i * 3, 3).ToArray(), row);
                exact.Add(id, row);
            }
        }

        return exact;
    }
}
