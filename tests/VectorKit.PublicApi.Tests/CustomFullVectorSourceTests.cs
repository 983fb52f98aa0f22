using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Reranking;
using VectorKit.Persistence;

namespace VectorKit.PublicApi.Tests;

/// <summary>
/// The gear co-op keeps each item's full description vector in its own catalogue store, keyed by item number; it is
/// written here outside the library and attached to a compressed inverted file for re-scoring.
/// </summary>
public sealed class GearCatalogueStore(Dictionary<long, float[]> vectors, int dimension) : IFullVectorSource
{
    private long _reads;

    public long Reads => Interlocked.Read(ref _reads);

    public int Dimension => dimension;

    public bool TryGetVector(long id, Span<float> destination)
    {
        if (!vectors.TryGetValue(id, out float[]? vector))
        {
            return false;
        }

        Interlocked.Increment(ref _reads);
        vector.CopyTo(destination);
        return true;
    }
}

public class CustomFullVectorSourceTests
{
    [Fact]
    public void ACallersOwnSource_ReScoresLikeVectorsKeptInMemory_AlsoAfterALoad()
    {
        const int D = 16, N = 400;
        var random = new Random(3);
        var store = new Dictionary<long, float[]>();
        var rows = new float[N * D];
        var ids = new long[N];
        for (int i = 0; i < N; i++)
        {
            ids[i] = 10_000 + (i * 3);
            float[] vector = Enumerable.Range(0, D).Select(_ => (float)random.NextDouble() + (i % 5)).ToArray();
            vector.CopyTo(rows, i * D);
            store[ids[i]] = vector;
        }

        var catalogue = new GearCatalogueStore(store, D);
        InvertedFileOptions Options(FullVectorLocation location) => new()
        {
            ListCount = 5,
            Encoding = VectorEncoding.Scalar8Bit,
            RescoreDepth = 30,
            FullVectors = location,
        };
        using var memory = new InvertedFileIndex(D, DistanceMetric.Cosine, Options(FullVectorLocation.InIndexMemory));
        using var external = new InvertedFileIndex(D, DistanceMetric.Cosine, Options(FullVectorLocation.ExternalSource), catalogue);
        foreach (InvertedFileIndex index in new[] { memory, external })
        {
            index.Train(rows);
            index.AddRange(ids, rows);
        }

        var saved = new MemoryStream();
        IndexFile.Save(external, saved);
        saved.Position = 0;
        using IVectorIndex loaded = IndexFile.Load(saved);
        var attachable = Assert.IsAssignableFrom<IExternalFullVectors>(loaded);
        Assert.Null(attachable.FullVectorSource);
        attachable.AttachFullVectors(catalogue);

        float[] query = rows.AsSpan(7 * D, D).ToArray();
        SearchHit[] expected = memory.Search(query, 5);
        Assert.Equal(expected, external.Search(query, 5));
        Assert.Equal(expected, loaded.Search(query, 5));
        Assert.True(catalogue.Reads > 0);
    }
}
