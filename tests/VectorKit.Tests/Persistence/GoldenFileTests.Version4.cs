using System.Buffers.Binary;
using VectorKit.Indexes;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Persistence;

namespace VectorKit.Tests.Persistence;

/// <summary>
/// Format version 4: today's writer gives the inverted file its id order (and fast-scan codes as the search's blocks),
/// so that it opens mapped. Each older inverted-file fixture, once loaded and saved again, must give its committed
/// version-4 fixture byte for byte; that fixture loads, and opens mapped, to an index searching like the old one.
/// </summary>
public partial class GoldenFileTests
{
    private static readonly float[][] s_version4Queries = [[0, 0, 0, 0], [0.5f, -0.5f, 1, 0], [-1, 1, 0.25f, 0.5f]];

    private static void AssertVersion4(string name, InvertedFileIndex loaded, string[] sections, SearchOptions options, IFullVectorSource? source = null)
    {
        byte[] resaved = IndexFileBytes.Save(loaded);
        byte[] fixture = Fixture(name, resaved);
        Assert.Equal(4u, BinaryPrimitives.ReadUInt32LittleEndian(fixture.AsSpan(8)));
        Assert.Equal(sections, SectionNames(fixture));
        Assert.Equal(fixture, resaved);

        string path = Path.Combine(Path.GetTempPath(), $"vectorkit-golden-{Guid.NewGuid():N}.vkx");
        File.WriteAllBytes(path, fixture);
        try
        {
            using var reloaded = IndexFile.Load<InvertedFileIndex>(new MemoryStream(fixture), IndexLoadOptions.Untrusted);
            using var mapped = IndexFile.OpenMapped<InvertedFileIndex>(path, MappedOpenOptions.Untrusted);
            Assert.True(mapped.IsMapped);
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
