using System.Buffers.Binary;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Persistence;

namespace VectorKit.Tests.Persistence;

/// <summary>
/// Format version 2: tuned search defaults in the header, one fixture per kind. Version 1 files (the fixtures beside)
/// load with no tuned defaults, and an index without them is still written as version 1, byte for byte.
/// </summary>
public partial class GoldenFileTests
{
    public static TheoryData<string> TunedKinds => new() { "exact", "graph", "ivf" };

    [Theory]
    [MemberData(nameof(TunedKinds))]
    public void TunedFixtureOfVersion2_LoadsWithItsDefaults_WhichSearchesUse(string kind)
    {
        using VectorIndex built = TunedSample(kind, out TunedSearchDefaults tuned, out SearchOptions same);
        byte[] fixture = Fixture($"{kind}-tuned-v2.vkx", IndexFileBytes.Save(built));
        Assert.Equal(2u, BinaryPrimitives.ReadUInt32LittleEndian(fixture.AsSpan(8)));

        using var loaded = (VectorIndex)IndexFile.Load(new MemoryStream(fixture), IndexLoadOptions.Untrusted);
        Assert.Equal((tuned.SearchWidth, tuned.RescoreDepth, tuned.TargetRecall, tuned.K), (loaded.TunedDefaults!.SearchWidth, loaded.TunedDefaults.RescoreDepth, loaded.TunedDefaults.TargetRecall, loaded.TunedDefaults.K));
        Assert.Equal(2, loaded.ChangesSinceTuning);

        // Searching at the defaults is searching with the tuned settings spelled out.
        foreach (float[] query in new[] { new float[] { 0, 0, 0 }, [0.5f, -0.5f, 1], [-1, 1, 0.25f] })
        {
            Assert.Equal(loaded.Search(query, 10, same), loaded.Search(query, 10));
        }

        // The exact index is written with its id order today (format version 3), the inverted file with its own (4), the
        // graph with the order of its live slots (5) and its upper-layer starts (6).
        byte[] resaved = IndexFileBytes.Save(loaded);
        Assert.Equal(kind switch { "exact" => Fixture("exact-tuned-v3.vkx", resaved), "ivf" => Fixture("ivf-tuned-v4.vkx", resaved), _ => Fixture("graph-tuned-v6.vkx", resaved) }, resaved);
        loaded.ApplyTunedDefaults(null);
        Assert.Equal(kind switch { "exact" => 3u, "ivf" => 4u, _ => 6u }, BinaryPrimitives.ReadUInt32LittleEndian(IndexFileBytes.Save(loaded).AsSpan(8)));
    }

    [Fact]
    public void Version1Fixtures_LoadWithoutTunedDefaults()
    {
        foreach (string name in new[] { "exact-v1.vkx", "graph-v1.vkx", "ivf-v1.vkx" })
        {
            using var loaded = (VectorIndex)IndexFile.Load(new MemoryStream(File.ReadAllBytes(Path.Combine(AppContext.BaseDirectory, "Persistence", "Fixtures", name))), IndexLoadOptions.Untrusted);
            Assert.Null(loaded.TunedDefaults);
            Assert.Equal(0, loaded.ChangesSinceTuning);
        }
    }

    // Each kind with tuned defaults on the knobs it has, then two changes after tuning.
    private static VectorIndex TunedSample(string kind, out TunedSearchDefaults tuned, out SearchOptions same)
    {
        switch (kind)
        {
            case "exact":
                ExactIndex exact = PersistenceSamples.ExactScalar(count: 8, dimension: 3, rescoreDepth: 4);
                tuned = new TunedSearchDefaults(null, 6, 0.95, 3);
                same = new SearchOptions { RescoreDepth = 6 };
                exact.ApplyTunedDefaults(tuned);
                exact.Add(5000, [0.1f, 0.2f, 0.3f]);
                exact.Remove(5000);
                return exact;
            case "graph":
                GraphIndex graph = PersistenceSamples.Graph(count: 24, dimension: 3);
                tuned = new TunedSearchDefaults(12, null, 0.9, 10);
                same = new SearchOptions { SearchWidth = 12 };
                graph.ApplyTunedDefaults(tuned);
                graph.Remove(503);
                graph.Remove(506);
                return graph;
            default:
                InvertedFileIndex ivf = PersistenceSamples.InvertedFile(VectorEncoding.Scalar8Bit, count: 20, rescoreDepth: 6);
                tuned = new TunedSearchDefaults(3, 12, 0.99, 5);
                same = new SearchOptions { SearchWidth = 3, RescoreDepth = 12 };
                ivf.ApplyTunedDefaults(tuned);
                ivf.Remove(205);
                ivf.Remove(210);
                return ivf;
        }
    }
}
