using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.IO;
using VectorKit.Reranking;
using VectorKit.Persistence;
using VectorKit.Tests.TestData;
using Xunit;
using static VectorKit.Tests.TestData.FullVectorSources;

namespace VectorKit.Tests.Indexes;

/// <summary>
/// The exact index under 8-bit storage re-scoring from full vectors held outside it
/// (<see cref="FullVectorLocation.ExternalSource"/>), against the same index keeping them in memory: identical hits,
/// ids and distances bit for bit, under every metric, from a .npy file written by <see cref="NpyRowWriter"/> and from
/// an in-memory source (under cosine both hold the vectors as given, not unit length, so the index must normalise what
/// it reads); and against the float32 exact index when every candidate is re-scored. The class name ends in
/// ExactIndexTests so scripts/test.sh re-runs it on the narrower SIMD paths.
/// </summary>
public sealed class ExternalSourceExactIndexTests : IDisposable
{
    private const int D = 24, N = 600, Q = 25;
    private readonly string _directory = Directory.CreateTempSubdirectory("vk-exact-external-").FullName;

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
        float[] data = ClusteredData.Generate(N, D, 12, 0.4f, seed: 31);
        float[] queries = ClusteredData.Generate(Q, D, 12, 0.4f, seed: 32);
        long[] ids = Enumerable.Range(0, N).Select(i => (long)i * 31 + 5).ToArray();
        using IDisposable? owner = FullVectorSources.Open(kind, _directory, data, ids, D, out IFullVectorSource source);
        using ExactIndex memory = Build(metric, data, ids, FullVectorLocation.InIndexMemory, null);
        using ExactIndex external = Build(metric, data, ids, FullVectorLocation.ExternalSource, source);
        Assert.True(memory.KeepsFullVectors);
        Assert.False(external.KeepsFullVectors);
        Assert.True(external.ReadsFullVectorsExternally);
        Assert.False(memory.ReadsFullVectorsExternally);
        Assert.Equal(FullVectorLocation.ExternalSource, external.Options.FullVectors);
        Assert.Same(source, external.FullVectorSource);
        Assert.True(external.MemoryBytes <= memory.MemoryBytes - ((long)N * D * sizeof(float)), $"{external.MemoryBytes} bytes against {memory.MemoryBytes}");

        // Removes move the last row into the hole: the source is read by id, so nothing there needs to move.
        foreach (long id in new[] { ids[3], ids[N - 1], ids[250] })
        {
            memory.Remove(id);
            external.Remove(id);
        }

        SearchOptions[] settings =
        [
            new SearchOptions(),
            new SearchOptions { RescoreDepth = 15 },
            new SearchOptions { RescoreDepth = 300 },
            new SearchOptions { RescoreDepth = 0 },
            new SearchOptions { RescoreDepth = 60, Filter = id => id % 3 != 0 },
        ];
        var hitsMemory = new SearchHit[10];
        var hitsExternal = new SearchHit[10];
        foreach (SearchOptions options in settings)
        {
            for (int q = 0; q < Q; q++)
            {
                ReadOnlySpan<float> query = queries.AsSpan(q * D, D);
                int a = memory.Search(query, hitsMemory, options);
                int b = external.Search(query, hitsExternal, options);
                Assert.Equal(10, b);
                Assert.Equal(hitsMemory.AsSpan(0, a).ToArray(), hitsExternal.AsSpan(0, b).ToArray());
            }

            BatchSearchResults batchMemory = memory.SearchBatch(queries, 10, options);
            BatchSearchResults batchExternal = external.SearchBatch(queries, 10, options);
            for (int q = 0; q < Q; q++)
            {
                Assert.Equal(batchMemory[q].ToArray(), batchExternal[q].ToArray());
            }
        }

        // Every candidate re-scored: the float32 exact index's answer, distances included (an independent path:
        // the float32 index scans its own rows and never re-scores).
        using var exact = new ExactIndex(D, metric);
        exact.AddRange(ids, data);
        foreach (long id in new[] { ids[3], ids[N - 1], ids[250] })
        {
            exact.Remove(id);
        }

        var all = new SearchOptions { RescoreDepth = N };
        var expected = new SearchHit[10];
        for (int q = 0; q < Q; q++)
        {
            exact.Search(queries.AsSpan(q * D, D), expected);
            int b = external.Search(queries.AsSpan(q * D, D), hitsExternal, all);
            Assert.Equal(expected, hitsExternal.AsSpan(0, b).ToArray());
        }

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
        float[] data = ClusteredData.Generate(N, D, 12, 0.4f, seed: 33);
        long[] ids = Enumerable.Range(0, N).Select(i => (long)i).ToArray();
        using ExactIndex index = Build(DistanceMetric.InnerProduct, data, ids, FullVectorLocation.ExternalSource, null);
        using ExactIndex approximate = Build(DistanceMetric.InnerProduct, data, ids, FullVectorLocation.InIndexMemory, null, rescoreDepth: 0);
        Assert.Null(index.FullVectorSource);
        Assert.True(index.ReadsFullVectorsExternally);
        var hits = new SearchHit[5];
        var e = Assert.Throws<InvalidOperationException>(() => index.Search(data.AsSpan(0, D), hits));
        Assert.Contains("none is attached", e.Message, StringComparison.Ordinal);
        e = Assert.Throws<InvalidOperationException>(() => index.SearchBatch(data.AsSpan(0, 3 * D), 5));
        Assert.Contains("none is attached", e.Message, StringComparison.Ordinal);

        // A depth of 0 needs no source: the codes' distances, as an index that keeps no full vectors gives them.
        var off = new SearchOptions { RescoreDepth = 0 };
        Assert.Equal(5, index.Search(data.AsSpan(0, D), hits, off));
        Assert.Equal(approximate.Search(data.AsSpan(0, D), 5), hits);
        BatchSearchResults batch = index.SearchBatch(data.AsSpan(0, 3 * D), 5, off);
        BatchSearchResults reference = approximate.SearchBatch(data.AsSpan(0, 3 * D), 5);
        for (int q = 0; q < 3; q++)
        {
            Assert.Equal(reference[q].ToArray(), batch[q].ToArray());
        }

        // TryGetVector without a source gives the decoded code, as for an index that keeps nothing.
        var decoded = new float[D];
        var expected = new float[D];
        Assert.True(index.TryGetVector(7, decoded));
        Assert.True(approximate.TryGetVector(7, expected));
        Assert.Equal(expected, decoded);
    }

    [Fact]
    public void Attaching_ChecksTheSourceAndTheOptions()
    {
        float[] data = ClusteredData.Generate(N, D, 12, 0.4f, seed: 34);
        long[] ids = Enumerable.Range(0, N).Select(i => (long)i).ToArray();
        var externalOptions = new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = 10, FullVectors = FullVectorLocation.ExternalSource };
        using var index = new ExactIndex(D, DistanceMetric.SquaredEuclidean, externalOptions);
        var wrongDimension = Assert.Throws<ArgumentException>(() => index.AttachFullVectors(new RowSource(new float[23], 23)));
        Assert.Equal("source", wrongDimension.ParamName);
        Assert.Contains("have 23 components; the index dimension is 24", wrongDimension.Message, StringComparison.Ordinal);
        Assert.Throws<ArgumentNullException>(() => index.AttachFullVectors(null!));
        Assert.Throws<ArgumentException>(() => new ExactIndex(D, DistanceMetric.SquaredEuclidean, externalOptions, new RowSource(new float[23], 23)));
        Assert.Throws<ArgumentNullException>(() => new ExactIndex(D, DistanceMetric.SquaredEuclidean, null!, new RowSource(data, D)));
        Assert.Null(index.FullVectorSource);

        // Indexes that do not read externally refuse a source: full vectors in memory, re-scoring off, float32 rows.
        var inMemory = new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = 10 };
        var noRescoring = new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit, FullVectors = FullVectorLocation.ExternalSource };
        var float32 = new ExactIndexOptions { RescoreDepth = 10, FullVectors = FullVectorLocation.ExternalSource };
        foreach (ExactIndexOptions options in new[] { inMemory, noRescoring, float32 })
        {
            using var other = new ExactIndex(D, DistanceMetric.SquaredEuclidean, options);
            Assert.False(other.ReadsFullVectorsExternally);
            var refused = Assert.Throws<InvalidOperationException>(() => other.AttachFullVectors(new RowSource(data, D)));
            Assert.Contains("does not read full vectors from a source", refused.Message, StringComparison.Ordinal);
            Assert.Throws<InvalidOperationException>(() => new ExactIndex(D, DistanceMetric.SquaredEuclidean, options, new RowSource(data, D)));
        }

        // Under float32 storage the option is ignored: the rows are the full vectors.
        using (var rows = new ExactIndex(D, DistanceMetric.SquaredEuclidean, float32))
        {
            Assert.False(rows.ReadsFullVectorsExternally);
            Assert.False(rows.KeepsFullVectors); // float32 rows are the full vectors; nothing is kept beside them
            rows.AddRange(ids, data);
            Assert.Equal(ids[4], rows.Search(data.AsSpan(4 * D, D), 1)[0].Id);
        }

        var undefined = Assert.Throws<ArgumentOutOfRangeException>(() => new ExactIndexOptions { FullVectors = (FullVectorLocation)7 });
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
        Assert.Equal(400, index.Search(data.AsSpan(400 * D, D), 1)[0].Id);

        index.Dispose();
        Assert.Throws<ObjectDisposedException>(() => index.AttachFullVectors(complete));
    }

    [Fact]
    public void SaveAndLoad_StoresNoVectors_AndTheLoadedIndexNeedsTheSourceAgain()
    {
        float[] data = ClusteredData.Generate(N, D, 12, 0.4f, seed: 35);
        float[] queries = ClusteredData.Generate(Q, D, 12, 0.4f, seed: 36);
        long[] ids = Enumerable.Range(0, N).Select(i => 7L * i).ToArray();
        using FileVectorSource file = FullVectorSources.WriteNpy(_directory, data, ids, D);
        using ExactIndex memory = Build(DistanceMetric.Cosine, data, ids, FullVectorLocation.InIndexMemory, null);
        using ExactIndex external = Build(DistanceMetric.Cosine, data, ids, FullVectorLocation.ExternalSource, file);
        var memoryFile = new MemoryStream();
        var externalFile = new MemoryStream();
        IndexFile.Save(memory, memoryFile);
        IndexFile.Save(external, externalFile);
        long vectorSection = (long)N * D * sizeof(float);
        // The vector section and its table entry are gone; the location field is added (sections align to 64 bytes).
        Assert.InRange(memoryFile.Length - externalFile.Length, vectorSection - 64, vectorSection + 64 + 24);

        externalFile.Position = 0;
        using ExactIndex loaded = IndexFile.Load<ExactIndex>(externalFile);
        Assert.Equal(FullVectorLocation.ExternalSource, loaded.Options.FullVectors);
        Assert.Equal(40, loaded.Options.RescoreDepth);
        Assert.True(loaded.ReadsFullVectorsExternally);
        Assert.False(loaded.KeepsFullVectors);
        Assert.Null(loaded.FullVectorSource);
        Assert.Throws<InvalidOperationException>(() => loaded.Search(queries.AsSpan(0, D), new SearchHit[5]));
        Assert.Throws<InvalidOperationException>(() => loaded.SearchBatch(queries, 5));
        ((IExternalFullVectors)loaded).AttachFullVectors(file);
        var options = new SearchOptions { RescoreDepth = 50 };
        var a = new SearchHit[10];
        var b = new SearchHit[10];
        for (int q = 0; q < Q; q++)
        {
            int n = memory.Search(queries.AsSpan(q * D, D), a, options);
            int m = loaded.Search(queries.AsSpan(q * D, D), b, options);
            Assert.Equal(a.AsSpan(0, n).ToArray(), b.AsSpan(0, m).ToArray());
        }

        BatchSearchResults batchMemory = memory.SearchBatch(queries, 10);
        BatchSearchResults batchLoaded = loaded.SearchBatch(queries, 10);
        for (int q = 0; q < Q; q++)
        {
            Assert.Equal(batchMemory[q].ToArray(), batchLoaded[q].ToArray());
        }

        // Saved again, the loaded index gives the same bytes.
        var again = new MemoryStream();
        IndexFile.Save(loaded, again);
        Assert.Equal(externalFile.ToArray(), again.ToArray());

        // With re-scoring off the location is still recorded, and read back.
        using ExactIndex off = Build(DistanceMetric.Cosine, data, ids, FullVectorLocation.ExternalSource, null, rescoreDepth: 0);
        var offFile = new MemoryStream();
        IndexFile.Save(off, offFile);
        offFile.Position = 0;
        using ExactIndex offLoaded = IndexFile.Load<ExactIndex>(offFile);
        Assert.Equal(FullVectorLocation.ExternalSource, offLoaded.Options.FullVectors);
        Assert.False(offLoaded.ReadsFullVectorsExternally);
        Assert.Equal(off.Search(queries.AsSpan(0, D), 10), offLoaded.Search(queries.AsSpan(0, D), 10));
    }

    private static ExactIndex Build(DistanceMetric metric, float[] data, long[] ids, FullVectorLocation location, IFullVectorSource? source, int rescoreDepth = 40)
    {
        var options = new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = rescoreDepth, FullVectors = location };
        ExactIndex index = source is null ? new ExactIndex(D, metric, options) : new ExactIndex(D, metric, options, source);
        index.Train(data);
        index.AddRange(ids, data);
        return index;
    }
}
