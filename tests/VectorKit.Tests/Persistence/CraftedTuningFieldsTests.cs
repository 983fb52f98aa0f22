using VectorKit.Indexes;
using VectorKit.Persistence;

namespace VectorKit.Tests.Persistence;

/// <summary>Tuned search defaults in a file that do not fit its index fail as an invalid header; version 1 ignores them.</summary>
[Trait("CWE", "CWE-20")]
public class CraftedTuningFieldsTests
{
    [Fact]
    public void AWidthAboveTheCap_IsRejected()
    {
        byte[] file = Crafted(PersistenceSamples.Graph(count: 24, dimension: 3), header => header.Integers["tuned-search-width"] = 200_000, version: 2);
        var e = Assert.Throws<IndexFileException>(() => IndexFileBytes.Load(file, IndexLoadOptions.Untrusted));
        Assert.Contains("the field 'tuned-search-width' is 200000; expected a value in [1, 100000]", e.Message);
    }

    [Fact]
    public void MoreListsProbedThanTheIndexHas_IsRejected()
    {
        byte[] file = Crafted(PersistenceSamples.InvertedFile(VectorEncoding.Scalar8Bit, count: 20, rescoreDepth: 6), header => header.Integers["tuned-search-width"] = 5, version: 2);
        var e = Assert.Throws<IndexFileException>(() => IndexFileBytes.Load(file, IndexLoadOptions.Untrusted));
        Assert.Contains("the tuned search defaults do not fit the index: The default search width 5 exceeds this index's largest, 4", e.Message);
    }

    [Fact]
    public void ADepthOnAnIndexWithoutFullVectors_IsRejected()
    {
        byte[] file = Crafted(PersistenceSamples.Exact(count: 6, dimension: 3), header => header.Integers["tuned-rescore-depth"] = 4, version: 2);
        var e = Assert.Throws<IndexFileException>(() => IndexFileBytes.Load(file, IndexLoadOptions.Untrusted));
        Assert.Contains("keeps no full vectors to re-score with, yet the defaults set a re-scoring depth of 4", e.Message);
    }

    [Fact]
    public void TuningFieldsInAVersion1File_AreIgnored()
    {
        byte[] file = Crafted(PersistenceSamples.Graph(count: 24, dimension: 3), header => header.Integers["tuned-search-width"] = 30, version: 1);
        using var loaded = (VectorIndex)IndexFileBytes.Load(file, IndexLoadOptions.Untrusted);
        Assert.Null(loaded.TunedDefaults);
    }

    // The index's file with tuned defaults (width 12 or none, k 10, target 0.9), one field then changed.
    private static byte[] Crafted(VectorIndex index, Action<IndexHeader> change, uint version)
    {
        using (index)
        {
            index.ApplyTunedDefaults(new TunedSearchDefaults(index.Knobs.MaxWidth > 0 ? Math.Min(3, index.Knobs.MaxWidth) : null, null, 0.9, 10));
            byte[] saved = IndexFileBytes.Save(index);
            IndexHeader header = IndexFileBytes.CopyHeader(IndexFileBytes.Header(saved));
            change(header);
            return IndexFileBytes.Compose(header, IndexFileBytes.Payloads(saved), version);
        }
    }
}
