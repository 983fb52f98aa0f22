using System.Buffers.Binary;
using VectorKit.Indexes;
using VectorKit.Indexes.Graph;
using VectorKit.Persistence;

namespace VectorKit.Tests.Persistence;

/// <summary>
/// Format version 6: today's writer gives the graph its upper-layer starts. Each version-5 graph fixture still loads,
/// and opens mapped under both presets (building its starts from the levels), to a graph that holds and searches like
/// the loaded one; saved again, loaded or mapped, it gives the committed version-6 fixture of the same variant byte for
/// byte (the version-1 tests beside check that fixture against their contents).
/// </summary>
public partial class GoldenFileTests
{
    public static TheoryData<string> Version5Graphs => new() { "graph", "graph-scalar", "graph-scalar-codes", "graph-scalar-external", "graph-tuned" };

    [Theory]
    [MemberData(nameof(Version5Graphs))]
    public void GraphFixtureOfVersion5_LoadsAndOpensMapped_AndIsWrittenAsItsVersion6Fixture(string variant)
    {
        string name = variant + "-v5.vkx";
        byte[] old = Committed(name);
        Assert.Equal(5u, BinaryPrimitives.ReadUInt32LittleEndian(old.AsSpan(8)));
        Assert.DoesNotContain("UpperLinkStarts", SectionNames(old));
        byte[] current = Committed(variant + "-v6.vkx");
        Assert.Equal(6u, BinaryPrimitives.ReadUInt32LittleEndian(current.AsSpan(8)));

        // The new column sits after the links it points into; nothing else moves.
        List<string> expectedSections = [.. SectionNames(old)];
        expectedSections.Insert(expectedSections.IndexOf("UpperLinks") + 1, "UpperLinkStarts");
        Assert.Equal(expectedSections, SectionNames(current));

        string path = Path.Combine(Path.GetTempPath(), $"vectorkit-golden-{Guid.NewGuid():N}.vkx");
        File.WriteAllBytes(path, old);
        try
        {
            using var loaded = IndexFile.Load<GraphIndex>(new MemoryStream(old), IndexLoadOptions.Untrusted);
            Assert.Equal(current, IndexFileBytes.Save(loaded));

            // External full vectors are not at hand here: searches use the codes alone (re-scoring off).
            var options = new SearchOptions { SearchWidth = 64, RescoreDepth = loaded.Options.RescoreDepth > 0 ? 0 : null };
            foreach (MappedOpenOptions open in new[] { MappedOpenOptions.Default, MappedOpenOptions.Untrusted })
            {
                using var mapped = IndexFile.OpenMapped<GraphIndex>(path, open);
                Assert.True(mapped.IsMapped);
                Assert.Equal(loaded.GetIds(), mapped.GetIds());
                Assert.Equal(loaded.TunedDefaults?.ToString(), mapped.TunedDefaults?.ToString());
                foreach (float[] query in new[] { new float[] { 1, 0.25f, -0.5f }, [0.5f, -0.5f, 1], [-1, 1, 0.25f] })
                {
                    foreach (int width in new[] { 1, 4, 64 })
                    {
                        var at = new SearchOptions { SearchWidth = width, RescoreDepth = options.RescoreDepth };
                        Assert.Equal(loaded.Search(query, 10, at), mapped.Search(query, 10, at));
                    }
                }

                Assert.Equal(current, IndexFileBytes.Save(mapped));
            }
        }
        finally
        {
            File.Delete(path);
        }
    }

    // A committed fixture as it is (never rewritten by VECTORKIT_WRITE_STORAGE_FIXTURES).
    private static byte[] Committed(string name) => File.ReadAllBytes(Path.Combine(AppContext.BaseDirectory, "Persistence", "Fixtures", name));
}
