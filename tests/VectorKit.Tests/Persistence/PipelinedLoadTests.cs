using System.Buffers.Binary;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Persistence;
using VectorKit.Tests.TestData;

namespace VectorKit.Tests.Persistence;

/// <summary>Sections larger than two 1 MiB blocks take the pipelined path (read block i + 1 while block i is checked).</summary>
public class PipelinedLoadTests
{
    private const int Rows = 5000;
    private const int Dimension = 160; // 3.2 MB of vectors: four blocks

    [Fact]
    public void ALargeExactIndex_RoundTripsThroughThePipelinedPath()
    {
        using ExactIndex index = Large();
        byte[] file = IndexFileBytes.Save(index);
        using var loaded = IndexFile.Load<ExactIndex>(new MemoryStream(file));
        Assert.Equal(file, IndexFileBytes.Save(loaded));
        float[] query = ClusteredData.Generate(1, Dimension, 5, 0.3f, 99);
        Assert.Equal(index.Search(query, 20), loaded.Search(query, 20));
        Assert.Equal(index.SearchBatch(query, 20)[0].ToArray(), loaded.SearchBatch(query, 20)[0].ToArray());
    }

    [Theory]
    [InlineData(0)]
    [InlineData(1700)] // inside the second block
    [InlineData(Rows - 1)] // the last block
    [Trait("Weakness", "CWE-20 input validation")]
    public void ANonFiniteComponentAnywhere_IsRejectedWithItsRowAndOffset(int row)
    {
        using ExactIndex index = Large();
        byte[] file = IndexFileBytes.Save(index);
        SectionSpan vectors = IndexFileBytes.Map(file).Single(s => s.Id == (uint)SectionId.Vectors);
        long offset = vectors.PayloadStart + (((long)row * Dimension) + 7) * sizeof(float);
        BinaryPrimitives.WriteSingleLittleEndian(file.AsSpan((int)offset), float.PositiveInfinity);
        IndexFileBytes.FixChecksums(file);
        IndexFileException e = Rejection.Assert(file);
        Assert.Contains($"non-finite vector component (Infinity) at row {row}, component 7, byte {offset}", e.Message, StringComparison.Ordinal);
        Assert.Equal(("Vectors", offset), (e.Section, e.Offset));
    }

    [Fact]
    [Trait("Weakness", "CWE-354 integrity check")]
    public void AFlipInTheLastBlockOfALargeSection_IsRejected()
    {
        using ExactIndex index = Large();
        byte[] file = IndexFileBytes.Save(index);
        SectionSpan vectors = IndexFileBytes.Map(file).Single(s => s.Id == (uint)SectionId.Vectors);
        file[(int)vectors.ChecksumStart - 3] ^= 0x10;
        Assert.Contains("is damaged: the checksum", Rejection.Assert(file).Message, StringComparison.Ordinal);
    }

    [Fact]
    public void ACancelledLoad_Throws()
    {
        using ExactIndex index = Large();
        byte[] file = IndexFileBytes.Save(index);
        using var cancel = new CancellationTokenSource();
        cancel.Cancel();
        Assert.ThrowsAny<OperationCanceledException>(() => IndexFile.Load(new MemoryStream(file), null, cancel.Token));
    }

    private static ExactIndex Large()
    {
        var index = new ExactIndex(Dimension, DistanceMetric.InnerProduct);
        index.AddRange(Enumerable.Range(0, Rows).Select(i => (long)i * 3).ToArray(), ClusteredData.Generate(Rows, Dimension, 5, 0.3f, 4));
        return index;
    }
}
