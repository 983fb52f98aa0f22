using VectorKit.Distance;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Persistence;

namespace VectorKit.Tests.Persistence;

/// <summary><see cref="IndexFile.Inspect"/>: header facts and section sizes against what was saved, and checksum verification on demand.</summary>
public sealed class IndexFileInspectTests : IDisposable
{
    private readonly string _folder = Directory.CreateTempSubdirectory("vk-inspect-").FullName;

    public void Dispose() => Directory.Delete(_folder, recursive: true);

    [Fact]
    public void ExactIndex_SummaryMatchesWhatWasSaved()
    {
        const int count = 37, dimension = 5;
        using var index = new ExactIndex(dimension, DistanceMetric.Cosine);
        var random = new Random(3);
        for (long id = 0; id < count; id++)
        {
            index.Add(id * 10, Enumerable.Range(0, dimension).Select(_ => (float)random.NextDouble() + 0.1f).ToArray());
        }

        string path = Path.Combine(_folder, "exact.vkx");
        IndexFile.Save(index, path);

        IndexFileSummary summary = IndexFile.Inspect(path, verifySections: true);
        Assert.Equal(IndexKind.Exact, summary.Kind);
        Assert.Equal(DistanceMetric.Cosine, summary.Metric);
        Assert.Equal(dimension, summary.Dimension);
        Assert.Equal(count, summary.Count);
        Assert.Equal(count, summary.StoredRows);
        Assert.Equal(3, summary.FormatVersion);
        Assert.True(summary.SectionsVerified);
        Assert.Equal(new FileInfo(path).Length, summary.FileBytes);

        // 8 bytes per id, 4 bytes per float component: the sizes follow from the counts alone.
        Assert.Equal(8L * count, summary.Sections.Single(s => s.Name == "Ids").PayloadBytes);
        Assert.Equal(4L * count * dimension, summary.Sections.Single(s => s.Name == "Vectors").PayloadBytes);
        Assert.Equal(4L * count, summary.Sections.Single(s => s.Name == "IdOrder").PayloadBytes);
    }

    [Fact]
    public void GraphIndex_SettingsCarryTheSearchWidth()
    {
        using var index = new GraphIndex(3, DistanceMetric.SquaredEuclidean, new GraphIndexOptions { SearchWidth = 77, LinksPerNode = 6 });
        for (long id = 0; id < 20; id++)
        {
            index.Add(id, [id, id * 2, 1]);
        }

        string path = Path.Combine(_folder, "graph.vkx");
        IndexFile.Save(index, path);

        IndexFileSummary summary = IndexFile.Inspect(path);
        Assert.Equal(IndexKind.Graph, summary.Kind);
        Assert.Equal(77, summary.Settings["default-search-width"]);
        Assert.Equal(6, summary.Settings["links-per-node"]);
        Assert.False(summary.SectionsVerified);
    }

    [Fact]
    [Trait("Weakness", "CWE-354 integrity check")]
    public void DamagedSection_PassesHeaderOnlyInspection_AndFailsVerification()
    {
        using var index = new ExactIndex(4, DistanceMetric.SquaredEuclidean);
        for (long id = 0; id < 50; id++)
        {
            index.Add(id, [id, 1, 2, 3]);
        }

        string path = Path.Combine(_folder, "damaged.vkx");
        IndexFile.Save(index, path);
        byte[] bytes = File.ReadAllBytes(path);
        bytes[^20] ^= 0x40; // inside the last section's payload, before its 8-byte checksum
        File.WriteAllBytes(path, bytes);

        Assert.Equal(50, IndexFile.Inspect(path).Count);
        IndexFileException e = Assert.Throws<IndexFileException>(() => IndexFile.Inspect(path, verifySections: true));
        Assert.Contains("checksum", e.Message, StringComparison.Ordinal);
    }
}
