using System.Buffers.Binary;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Persistence;

namespace VectorKit.Tests.Persistence;

/// <summary>
/// Format version 4: today's writer gives the inverted file its id order (and fast-scan codes as the search's blocks),
/// so that it opens mapped; version 5 gives the graph its id order (of live slots). Each older inverted-file fixture, once loaded and saved again, must give its committed
/// version-4 fixture byte for byte; that fixture loads, and opens mapped, to an index searching like the old one.
/// </summary>
public partial class GoldenFileTests
{
    private static readonly float[][] s_version4Queries = [[0, 0, 0, 0], [0.5f, -0.5f, 1, 0], [-1, 1, 0.25f, 0.5f]];

    private static void AssertVersion4(string name, InvertedFileIndex loaded, string[] sections, SearchOptions options, IFullVectorSource? source = null)
        => AssertResavedFixture(name, 4, loaded, sections, options, source);

    /// <summary>
    /// Saves <paramref name="loaded"/> (an older fixture, loaded) again: the bytes must be the committed fixture
    /// <paramref name="name"/> of format <paramref name="version"/>, with <paramref name="sections"/>; that fixture loads,
    /// and opens mapped, to an index holding and searching like <paramref name="loaded"/>.
    /// </summary>
    private static void AssertResavedFixture<TIndex>(string name, uint version, TIndex loaded, string[] sections, SearchOptions options, IFullVectorSource? source = null)
        where TIndex : VectorIndex
    {
        byte[] resaved = IndexFileBytes.Save(loaded);
        byte[] fixture = Fixture(name, resaved);
        Assert.Equal(version, BinaryPrimitives.ReadUInt32LittleEndian(fixture.AsSpan(8)));
        Assert.Equal(sections, SectionNames(fixture));
        Assert.Equal(fixture, resaved);

        string path = Path.Combine(Path.GetTempPath(), $"vectorkit-golden-{Guid.NewGuid():N}.vkx");
        File.WriteAllBytes(path, fixture);
        try
        {
            using TIndex reloaded = IndexFile.Load<TIndex>(new MemoryStream(fixture), IndexLoadOptions.Untrusted);
            using TIndex mapped = IndexFile.OpenMapped<TIndex>(path, MappedOpenOptions.Untrusted);
            Assert.True(mapped is InvertedFileIndex { IsMapped: true } or GraphIndex { IsMapped: true });
            if (source is not null)
            {
                reloaded.AttachFullVectors(source);
                mapped.AttachFullVectors(source);
            }

            int d = loaded.Dimension;
            Assert.Equal(loaded.GetIds(), mapped.GetIds());
            var expected = new float[d];
            var actual = new float[d];
            foreach (long id in loaded.GetIds())
            {
                Assert.True(loaded.TryGetVector(id, expected));
                Assert.True(mapped.TryGetVector(id, actual));
                Assert.Equal(expected, actual);
            }

            foreach (float[] query in s_version4Queries)
            {
                float[] q = query.AsSpan(0, d).ToArray();
                if (loaded.Metric == DistanceMetric.Cosine && !q.AsSpan().ContainsAnyExcept(0f))
                {
                    continue; // no direction to compare
                }

                SearchHit[] hits = loaded.Search(q, 10, options);
                Assert.Equal(hits, reloaded.Search(q, 10, options));
                Assert.Equal(hits, mapped.Search(q, 10, options));
            }
        }
        finally
        {
            File.Delete(path);
        }
    }
}
