using System.Buffers.Binary;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Persistence;

namespace VectorKit.Tests.Persistence;

/// <summary>
/// Exact-index files under 8-bit storage with valid checksums but a broken structure, as someone could craft them: each
/// must be rejected with a message naming the problem before a scan could read past a code or decode garbage.
/// </summary>
public class CraftedExactIndexTests
{
    [Fact]
    [Trait("Weakness", "CWE-20 input validation")]
    public void CodesWithNonZeroPadding_OrUnusableRanges_AreRejected()
    {
        Assert.Contains("row 1 has non-zero padding after its 3 code bytes", Reject(file => Edit(file, SectionId.ScalarCodes, span => span[16 + 7] = 1)), StringComparison.Ordinal);
        Assert.Contains("the scalar range of component 1 (minimum", Reject(file => Edit(file, SectionId.ScalarRanges, span => BinaryPrimitives.WriteSingleLittleEndian(span[16..], -1f))), StringComparison.Ordinal);
        Assert.Contains("the scalar range of component 0 (minimum NaN", Reject(file => Edit(file, SectionId.ScalarRanges, span => BinaryPrimitives.WriteSingleLittleEndian(span, float.NaN))), StringComparison.Ordinal);
        Assert.Contains("non-finite vector component (Infinity) at row 2, component 1", Reject(file => Edit(file, SectionId.Vectors, span => BinaryPrimitives.WriteSingleLittleEndian(span[(4 * 7)..], float.PositiveInfinity)), rescoreDepth: 2), StringComparison.Ordinal);
    }

    [Fact]
    [Trait("Weakness", "CWE-20 input validation")]
    public void ARepeatedId_IsRejected()
    {
        string message = Reject(file => Edit(file, SectionId.Ids, span => span[..8].CopyTo(span[^8..])));
        Assert.Contains("Index file holds an invalid 8-bit exact index: id 1000 appears at rows 0 and 10; ids must be unique", message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("Weakness", "CWE-130 length inconsistency")]
    public void HeaderFieldsDisagreeingWithTheSections_AreRejected()
    {
        using ExactIndex index = PersistenceSamples.ExactScalar(rescoreDepth: 3);
        byte[] file = IndexFileBytes.Save(index);
        IndexHeader header = IndexFileBytes.CopyHeader(IndexFileBytes.Header(file));
        List<byte[]> payloads = IndexFileBytes.Payloads(file);

        header.Integers["trained"] = 0;
        Assert.Contains("an untrained exact index holds no vectors, but it declares 11", Rejection.Assert(IndexFileBytes.Compose(header, payloads)).Message, StringComparison.Ordinal);
        header.Integers["trained"] = 1;

        // Without re-scoring the full vectors are not expected: their section is left over.
        header.Integers["rescore-depth"] = 0;
        Assert.Contains("section 3 is 'Vectors' (id 2); this index kind expects 'IdOrder' (id 14) there", Rejection.Assert(IndexFileBytes.Compose(header, payloads)).Message, StringComparison.Ordinal);
        header.Integers["rescore-depth"] = 3;

        header.Integers["vector-storage"] = 2;
        Assert.Contains("the field 'vector-storage' is 2; expected a value in [0, 1]", Rejection.Assert(IndexFileBytes.Compose(header, payloads)).Message, StringComparison.Ordinal);

        // Read as float32, the ranges stand where the vectors belong; an older reader fails the same way.
        header.Integers["vector-storage"] = 0;
        Assert.Contains("section 1 is 'ScalarRanges' (id 11); this index kind expects 'Vectors' (id 2) there", Rejection.Assert(IndexFileBytes.Compose(header, payloads)).Message, StringComparison.Ordinal);
        header.Integers.Remove("vector-storage");
        Assert.Contains("this index kind expects 'Vectors' (id 2) there", Rejection.Assert(IndexFileBytes.Compose(header, payloads)).Message, StringComparison.Ordinal);

        // Codes one row short of the count.
        header = IndexFileBytes.CopyHeader(IndexFileBytes.Header(file));
        int codes = header.Sections.FindIndex(s => s.Id == (uint)SectionId.ScalarCodes);
        payloads[codes] = payloads[codes][..^16];
        header.Sections[codes] = header.Sections[codes] with { Length = payloads[codes].Length };
        IndexFileException e = Rejection.Assert(IndexFileBytes.Compose(header, payloads));
        Assert.Equal("ScalarCodes", e.Section);
        Assert.Contains("the header's counts require 176", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("Weakness", "CWE-20 input validation")]
    public void AFullVectorLocationThatDisagreesWithTheSections_IsRejected()
    {
        using ExactIndex external = PersistenceSamples.ExactScalar(rescoreDepth: 3, fullVectors: FullVectorLocation.ExternalSource);
        byte[] file = IndexFileBytes.Save(external);
        IndexHeader header = IndexFileBytes.CopyHeader(IndexFileBytes.Header(file));
        Assert.Equal(1, header.Integers["full-vector-location"]);
        Assert.DoesNotContain(IndexFileBytes.Map(file), s => s.Id == (uint)SectionId.Vectors);

        // Claimed in memory, but no vectors stored; and a value that names no location.
        header.Integers.Remove("full-vector-location");
        Rejection.Assert(IndexFileBytes.Compose(header, IndexFileBytes.Payloads(file)));
        header.Integers["full-vector-location"] = 2;
        Assert.Contains("the field 'full-vector-location' is 2; expected a value in [0, 1]", Rejection.Assert(IndexFileBytes.Compose(header, IndexFileBytes.Payloads(file))).Message, StringComparison.Ordinal);

        // Claimed external over a file that stores the vectors: the section is left over.
        using ExactIndex memory = PersistenceSamples.ExactScalar(rescoreDepth: 3);
        byte[] withVectors = IndexFileBytes.Save(memory);
        IndexHeader memoryHeader = IndexFileBytes.CopyHeader(IndexFileBytes.Header(withVectors));
        Assert.False(memoryHeader.Integers.ContainsKey("full-vector-location"));
        memoryHeader.Integers["full-vector-location"] = 1;
        Assert.Contains("section 3 is 'Vectors' (id 2); this index kind expects 'IdOrder' (id 14) there", Rejection.Assert(IndexFileBytes.Compose(memoryHeader, IndexFileBytes.Payloads(withVectors))).Message, StringComparison.Ordinal);
    }

    private static string Reject(Action<byte[]> damage, int rescoreDepth = 0)
    {
        using ExactIndex index = PersistenceSamples.ExactScalar(rescoreDepth: rescoreDepth);
        Assert.Equal(VectorEncoding.Scalar8Bit, index.Options.Encoding);
        byte[] file = IndexFileBytes.Save(index);
        damage(file);
        IndexFileBytes.FixChecksums(file);
        return Rejection.Assert(file).Message;
    }

    private delegate void SpanEdit(Span<byte> payload);

    private static void Edit(byte[] file, SectionId id, SpanEdit edit)
    {
        SectionSpan section = IndexFileBytes.Map(file).Single(s => s.Id == (uint)id);
        edit(file.AsSpan((int)section.PayloadStart, (int)section.Length));
    }
}
