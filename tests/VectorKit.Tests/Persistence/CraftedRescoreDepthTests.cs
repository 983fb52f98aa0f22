using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Persistence;

namespace VectorKit.Tests.Persistence;

/// <summary>
/// A re-score depth beyond <see cref="VectorIndexOptions.MaxRescoreDepth"/> in a file's header. The exact and
/// inverted-file codecs accepted any int and then let the options' <see cref="ArgumentOutOfRangeException"/> escape the
/// loader (found by the mutation fuzz test); it must be an <see cref="IndexFileException"/> naming the field.
/// </summary>
public class CraftedRescoreDepthTests
{
    private const long TooDeep = 1_048_579;

    [Fact]
    [Trait("Weakness", "CWE-20 input validation")]
    public void AnExactIndexDepthBeyondTheMaximum_IsAFileError()
    {
        using ExactIndex index = PersistenceSamples.ExactScalar(rescoreDepth: 3);
        AssertRejected(IndexFileBytes.Save(index));
    }

    [Fact]
    [Trait("Weakness", "CWE-20 input validation")]
    public void AnInvertedFileDepthBeyondTheMaximum_IsAFileError()
    {
        using InvertedFileIndex index = PersistenceSamples.InvertedFile(VectorEncoding.Scalar8Bit, rescoreDepth: 3);
        AssertRejected(IndexFileBytes.Save(index));
    }

    private static void AssertRejected(byte[] file)
    {
        IndexHeader header = IndexFileBytes.CopyHeader(IndexFileBytes.Header(file));
        header.Integers["rescore-depth"] = TooDeep;
        IndexFileException e = Rejection.Assert(IndexFileBytes.Compose(header, IndexFileBytes.Payloads(file)));
        Assert.Contains($"the field 'rescore-depth' is {TooDeep}; expected a value in [0, {VectorIndexOptions.MaxRescoreDepth}]", e.Message, StringComparison.Ordinal);
    }
}
