using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.IO;
using VectorKit.Reranking;
using VectorKit.Persistence;
using VectorKit.Tests.TestData;
using Xunit;
using static VectorKit.Tests.TestData.FullVectorSources;

namespace VectorKit.Tests.Indexes.Graph;

/// <summary>
/// The graph index under 8-bit storage re-scoring from full vectors held outside it
/// (<see cref="FullVectorLocation.ExternalSource"/>), against the same graph keeping them in memory (same seed and
/// options but the location, one build thread, so both graphs are identical): identical hits, ids and distances bit for
/// bit, under every metric, from a .npy file written by <see cref="NpyRowWriter"/> and from an in-memory source (under
/// cosine both hold the vectors as given, not unit length, so the index must normalise what it reads); every distance
/// returned checked against the float32 exact index's distance for that id. The class name ends in GraphIndexTests so
/// scripts/test.sh re-runs it on the narrower SIMD paths.
/// </summary>
public sealed class ExternalSourceGraphIndexTests : IDisposable
{
    private const int D = 24, N = 600, Q = 25;
    private readonly string _directory = Directory.CreateTempSubdirectory("vk-graph-external-").FullName;

    public static TheoryData<DistanceMetric, FullVectorSourceKind> Cases()
    {
        var data = new TheoryData<DistanceMetric, FullVectorSourceKind>();
        foreach (DistanceMetric metric in Enum.GetValues<DistanceMetric>())
        {
            data.Add(metric, FullVectorSourceKind.NpyFile);
            data.Add(metric, FullVectorSourceKind.InMemory);
        }

        return data;
    }

    public void Dispose() => Directory.Delete(_directory, recursive: true);

    [Theory]
    [MemberData(nameof(Cases))]
    public void RescoringFromASource_EqualsRescoringFromMemory_BitForBit(DistanceMetric metric, FullVectorSourceKind kind)
    {
        float[] data = ClusteredData.Generate(N, D, 12, 0.4f, seed: 41);
        float[] queries = ClusteredData.Generate(Q, D, 12, 0.4f, seed: 42);
        long[] ids = Enumerable.Range(0, N).Select(i => (long)i * 31 + 5).ToArray();
        using IDisposable? owner = FullVectorSources.Open(kind, _directory, data, ids, D, out IFullVectorSource source);
        using GraphIndex memory = Build(metric, data, ids, FullVectorLocation.InIndexMemory, null);
        using GraphIndex external = Build(metric, data, ids, FullVectorLocation.ExternalSource, source);
        Assert.True(memory.KeepsFullVectors);
        Assert.False(external.KeepsFullVectors);
        Assert.True(external.ReadsFullVectorsExternally);
        Assert.False(memory.ReadsFullVectorsExternally);
        Assert.Equal(FullVectorLocation.ExternalSource, external.Options.FullVectors);
        Assert.Same(source, external.FullVectorSource);
        Assert.Equal(memory.MemoryBytes - FullVectorBytes(memory), external.MemoryBytes);

        // The exact index's distance of every id under every query: an independent path (float32 rows, no graph).
        using var exact = new ExactIndex(D, metric);
        exact.AddRange(ids, data);
        var reference = new Dictionary<long, float>[Q];
        for (int q = 0; q < Q; q++)
        {
            reference[q] = exact.Search(queries.AsSpan(q * D, D), N).ToDictionary(h => h.Id, h => h.Distance);
        }

        Compare(memory, external, queries, reference);

        // Removals repair the graph on the codes; the source is read by id, so nothing there needs to move.
        long[] removed = [ids[3], ids[N - 1], ids[250], ids[251]];
        memory.RemoveRange(removed);
        external.RemoveRange(removed);
        Compare(memory, external, queries, reference);

        // Compaction rebuilds from the codes alone (no full vectors to copy when external), identically.
        memory.Compact();
        external.Compact();
        Assert.Same(source, external.FullVectorSource);
        Assert.Equal(memory.MemoryBytes - FullVectorBytes(memory), external.MemoryBytes);
        Compare(memory, external, queries, reference);

        // The vector read back is the source's, unit length under cosine as the in-memory index stores it.
        var fromMemory = new float[D];
        var fromSource = new float[D];
        Assert.True(memory.TryGetVector(ids[17], fromMemory));
        Assert.True(external.TryGetVector(ids[17], fromSource));
        Assert.Equal(fromMemory, fromSource);
        Assert.False(external.TryGetVector(ids[3], fromSource));
    }

    [Fact]
    public void WithoutASource_RescoringSearchesThrow_ApproximateSearchesWork()
    {
        float[] data = ClusteredData.Generate(N, D, 12, 0.4f, seed: 43);
        long[] ids = Enumerable.Range(0, N).Select(i => (long)i).ToArray();
        using GraphIndex index = Build(DistanceMetric.InnerProduct, data, ids, FullVectorLocation.ExternalSource, null);
        using GraphIndex approximate = Build(DistanceMetric.InnerProduct, data, ids, FullVectorLocation.InIndexMemory, null, rescoreDepth: 0);
        Assert.Null(index.FullVectorSource);
        Assert.True(index.ReadsFullVectorsExternally);
        var hits = new SearchHit[5];
        var e = Assert.Throws<InvalidOperationException>(() => index.Search(data.AsSpan(0, D), hits));
        Assert.Contains("none is attached", e.Message, StringComparison.Ordinal);
        e = Assert.Throws<InvalidOperationException>(() => index.SearchBatch(data.AsSpan(0, 3 * D), 5));
        Assert.Contains("none is attached", e.Message, StringComparison.Ordinal);

        // The filtered exact scan needs the source as much as the walk does.
        index.FilteredScanFractionOverride = 1.0;
        e = Assert.Throws<InvalidOperationException>(() => index.Search(data.AsSpan(0, D), hits, new SearchOptions { Filter = id => id % 2 == 0 }));
        Assert.Contains("none is attached", e.Message, StringComparison.Ordinal);
        index.FilteredScanFractionOverride = null;

        // A depth of 0 needs no source: the codes' distances, as a graph that keeps no full vectors gives them (the two
        // graphs are the same: built on the codes with one thread from one seed).
        var off = new SearchOptions { RescoreDepth = 0 };
        Assert.Equal(5, index.Search(data.AsSpan(0, D), hits, off));
        Assert.Equal(approximate.Search(data.AsSpan(0, D), 5), hits);
        BatchSearchResults batch = index.SearchBatch(data.AsSpan(0, 3 * D), 5, off);
        BatchSearchResults expectedBatch = approximate.SearchBatch(data.AsSpan(0, 3 * D), 5);
        for (int q = 0; q < 3; q++)
        {
            Assert.Equal(expectedBatch[q].ToArray(), batch[q].ToArray());
        }

        // TryGetVector without a source gives the decoded code, as for a graph that keeps nothing.
        var decoded = new float[D];
        var expected = new float[D];
        Assert.True(index.TryGetVector(7, decoded));
        Assert.True(approximate.TryGetVector(7, expected));
        Assert.Equal(expected, decoded);

        // Adds, removals and compaction need no source (the graph works on the codes).
        index.Add(N, data.AsSpan(0, D));
        index.Remove(3);
        index.Compact();
        Assert.Equal(N, index.Count);
    }

    [Fact]
    public void Attaching_ChecksTheSourceAndTheOptions()
    {
        float[] data = ClusteredData.Generate(N, D, 12, 0.4f, seed: 44);
        long[] ids = Enumerable.Range(0, N).Select(i => (long)i).ToArray();
        var externalOptions = Options(10, FullVectorLocation.ExternalSource);
        using var index = new GraphIndex(D, DistanceMetric.SquaredEuclidean, externalOptions);
        var wrongDimension = Assert.Throws<ArgumentException>(() => index.AttachFullVectors(new RowSource(new float[23], 23)));
        Assert.Equal("source", wrongDimension.ParamName);
        Assert.Contains("have 23 components; the index dimension is 24", wrongDimension.Message, StringComparison.Ordinal);
        Assert.Throws<ArgumentNullException>(() => index.AttachFullVectors(null!));
        Assert.Throws<ArgumentException>(() => new GraphIndex(D, DistanceMetric.SquaredEuclidean, externalOptions, new RowSource(new float[23], 23)));
        Assert.Throws<ArgumentNullException>(() => new GraphIndex(D, DistanceMetric.SquaredEuclidean, null!, new RowSource(data, D)));
        Assert.Throws<ArgumentNullException>(() => new GraphIndex(D, DistanceMetric.SquaredEuclidean, externalOptions, null!));
        Assert.Null(index.FullVectorSource);

        // Graphs that do not read externally refuse a source: full vectors in memory, re-scoring off, float32 rows.
        var inMemory = Options(10, FullVectorLocation.InIndexMemory);
        var noRescoring = Options(0, FullVectorLocation.ExternalSource);
        var float32 = new GraphIndexOptions { RescoreDepth = 10, FullVectors = FullVectorLocation.ExternalSource };
        foreach (GraphIndexOptions options in new[] { inMemory, noRescoring, float32 })
        {
            using var other = new GraphIndex(D, DistanceMetric.SquaredEuclidean, options);
            Assert.False(other.ReadsFullVectorsExternally);
            var refused = Assert.Throws<InvalidOperationException>(() => other.AttachFullVectors(new RowSource(data, D)));
            Assert.Contains("does not read full vectors from a source", refused.Message, StringComparison.Ordinal);
            Assert.Throws<InvalidOperationException>(() => new GraphIndex(D, DistanceMetric.SquaredEuclidean, options, new RowSource(data, D)));
        }

        // Under float32 storage the option is ignored: the rows are the full vectors, and the distances exact.
        using (var rows = new GraphIndex(D, DistanceMetric.SquaredEuclidean, float32))
        {
            Assert.False(rows.KeepsFullVectors);
            rows.AddRange(ids, data);
            SearchHit best = rows.Search(data.AsSpan(4 * D, D), 1)[0];
            Assert.Equal((4L, 0f), (best.Id, best.Distance));
            var row = new float[D];
            Assert.True(rows.TryGetVector(9, row));
            Assert.Equal(data.AsSpan(9 * D, D).ToArray(), row);
        }

        var undefined = Assert.Throws<ArgumentOutOfRangeException>(() => new GraphIndexOptions { FullVectors = (FullVectorLocation)7 });
        Assert.Equal("FullVectors", undefined.ParamName);

        // A source that lacks a candidate's vector is a clear error, not a wrong distance.
        index.Train(data);
        index.AddRange(ids, data);
        index.AttachFullVectors(new RowSource(data.AsSpan(0, 10 * D).ToArray(), D));
        var missing = Assert.Throws<InvalidOperationException>(() => index.Search(data.AsSpan(400 * D, D), new SearchHit[5]));
        Assert.Contains("has no vector for id", missing.Message, StringComparison.Ordinal);

        // Attaching again replaces the source.
        var complete = new RowSource(data, D);
        index.AttachFullVectors(complete);
        Assert.Same(complete, index.FullVectorSource);
        Assert.Equal((400L, 0f), (index.Search(data.AsSpan(400 * D, D), 1)[0].Id, index.Search(data.AsSpan(400 * D, D), 1)[0].Distance));

        index.Dispose();
        Assert.Throws<ObjectDisposedException>(() => index.AttachFullVectors(complete));
    }

    [Fact]
    public void SaveAndLoad_StoresNoVectors_AndTheLoadedGraphNeedsTheSourceAgain()
    {
        float[] data = ClusteredData.Generate(N, D, 12, 0.4f, seed: 45);
        float[] queries = ClusteredData.Generate(Q, D, 12, 0.4f, seed: 46);
        long[] ids = Enumerable.Range(0, N).Select(i => 7L * i).ToArray();
        using FileVectorSource file = FullVectorSources.WriteNpy(_directory, data, ids, D);
        using GraphIndex memory = Build(DistanceMetric.Cosine, data, ids, FullVectorLocation.InIndexMemory, null);
        using GraphIndex external = Build(DistanceMetric.Cosine, data, ids, FullVectorLocation.ExternalSource, file);
        memory.RemoveRange([ids[5], ids[77]]);
        external.RemoveRange([ids[5], ids[77]]);
        var memoryFile = new MemoryStream();
        var externalFile = new MemoryStream();
        IndexFile.Save(memory, memoryFile);
        IndexFile.Save(external, externalFile);
        long vectorSection = (long)N * D * sizeof(float);
        // The vector section and its table entry are gone; the location field is added (sections align to 64 bytes).
        Assert.InRange(memoryFile.Length - externalFile.Length, vectorSection - 64, vectorSection + 64 + 24);

        externalFile.Position = 0;
        using GraphIndex loaded = IndexFile.Load<GraphIndex>(externalFile);
        Assert.Equal(FullVectorLocation.ExternalSource, loaded.Options.FullVectors);
        Assert.Equal(40, loaded.Options.RescoreDepth);
        Assert.True(loaded.ReadsFullVectorsExternally);
        Assert.False(loaded.KeepsFullVectors);
        Assert.Null(loaded.FullVectorSource);
        Assert.Throws<InvalidOperationException>(() => loaded.Search(queries.AsSpan(0, D), new SearchHit[5]));
        Assert.Throws<InvalidOperationException>(() => loaded.SearchBatch(queries, 5));
        ((IExternalFullVectors)loaded).AttachFullVectors(file);
        foreach (SearchOptions options in new[] { new SearchOptions { RescoreDepth = 50 }, new SearchOptions { Filter = id => id % 3 == 0 } })
        {
            var a = new SearchHit[10];
            var b = new SearchHit[10];
            for (int q = 0; q < Q; q++)
            {
                int n = memory.Search(queries.AsSpan(q * D, D), a, options);
                int m = loaded.Search(queries.AsSpan(q * D, D), b, options);
                Assert.Equal(a.AsSpan(0, n).ToArray(), b.AsSpan(0, m).ToArray());
            }
        }

        BatchSearchResults batchMemory = memory.SearchBatch(queries, 10);
        BatchSearchResults batchLoaded = loaded.SearchBatch(queries, 10);
        for (int q = 0; q < Q; q++)
        {
            Assert.Equal(batchMemory[q].ToArray(), batchLoaded[q].ToArray());
        }

        // Saved again, the loaded graph gives the same bytes.
        var again = new MemoryStream();
        IndexFile.Save(loaded, again);
        Assert.Equal(externalFile.ToArray(), again.ToArray());

        // With re-scoring off the location is still recorded, and read back.
        using GraphIndex off = Build(DistanceMetric.Cosine, data, ids, FullVectorLocation.ExternalSource, null, rescoreDepth: 0);
        var offFile = new MemoryStream();
        IndexFile.Save(off, offFile);
        offFile.Position = 0;
        using GraphIndex offLoaded = IndexFile.Load<GraphIndex>(offFile);
        Assert.Equal(FullVectorLocation.ExternalSource, offLoaded.Options.FullVectors);
        Assert.False(offLoaded.ReadsFullVectorsExternally);
        Assert.Equal(off.Search(queries.AsSpan(0, D), 10), offLoaded.Search(queries.AsSpan(0, D), 10));
    }

    // Each setting under a graph walk and under the filtered exact scan (forced on both graphs), single and batch.
    private static void Compare(GraphIndex memory, GraphIndex external, float[] queries, Dictionary<long, float>[] reference)
    {
        SearchOptions[] settings =
        [
            new SearchOptions(),
            new SearchOptions { RescoreDepth = 15 },
            new SearchOptions { RescoreDepth = 200, SearchWidth = 200 },
            new SearchOptions { RescoreDepth = 0 },
            new SearchOptions { RescoreDepth = 60, Filter = id => id % 3 != 0 },
        ];
        var hitsMemory = new SearchHit[10];
        var hitsExternal = new SearchHit[10];
        foreach (double? scan in new double?[] { 0.0, 1.0 })
        {
            memory.FilteredScanFractionOverride = scan;
            external.FilteredScanFractionOverride = scan;
            foreach (SearchOptions options in settings)
            {
                for (int q = 0; q < Q; q++)
                {
                    ReadOnlySpan<float> query = queries.AsSpan(q * D, D);
                    int a = memory.Search(query, hitsMemory, options);
                    int b = external.Search(query, hitsExternal, options);
                    Assert.Equal(10, b);
                    Assert.Equal(hitsMemory.AsSpan(0, a).ToArray(), hitsExternal.AsSpan(0, b).ToArray());
                    if (options.RescoreDepth != 0)
                    {
                        foreach (SearchHit hit in hitsExternal.AsSpan(0, b))
                        {
                            Assert.Equal(reference[q][hit.Id], hit.Distance);
                        }
                    }
                }

                BatchSearchResults batchMemory = memory.SearchBatch(queries, 10, options);
                BatchSearchResults batchExternal = external.SearchBatch(queries, 10, options);
                for (int q = 0; q < Q; q++)
                {
                    Assert.Equal(batchMemory[q].ToArray(), batchExternal[q].ToArray());
                }
            }
        }

        memory.FilteredScanFractionOverride = null;
        external.FilteredScanFractionOverride = null;
    }

    // The full vectors an in-memory graph keeps, at their reserved capacity (what the external graph does not hold).
    private static long FullVectorBytes(GraphIndex graph)
    {
        return graph.ExportParts(parts => parts.Vectors!.Bytes);
    }

    private static GraphIndexOptions Options(int rescoreDepth, FullVectorLocation location)
        => new() { LinksPerNode = 8, BuildWidth = 48, Seed = 5, MaxDegreeOfParallelism = 1, Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = rescoreDepth, FullVectors = location };

    private static GraphIndex Build(DistanceMetric metric, float[] data, long[] ids, FullVectorLocation location, IFullVectorSource? source, int rescoreDepth = 40)
    {
        GraphIndexOptions options = Options(rescoreDepth, location);
        GraphIndex index = source is null ? new GraphIndex(D, metric, options) : new GraphIndex(D, metric, options, source);
        index.Train(data);
        index.AddRange(ids, data);
        return index;
    }
}
