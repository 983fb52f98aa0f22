using System.Buffers.Binary;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Quantization;
using VectorKit.Persistence;

namespace VectorKit.Tests.Persistence;

/// <summary>
/// Inverted-file files with valid checksums but a broken structure, as someone could craft them: each must be rejected
/// with a message naming the problem before a scan could read outside a list or past a code.
/// </summary>
public class CraftedInvertedFileTests
{
    [Fact]
    [Trait("Weakness", "CWE-130 length inconsistency")]
    public void AListLengthDisagreeingWithTheCount_IsRejectedBeforeTheCodesAreRead()
    {
        string message = Reject(VectorEncoding.Float32, file => Edit(file, SectionId.ListLengths, (span) => Add32(span, 0, 1)));
        Assert.Contains("the list lengths add up to 29, but the header declares 28 vectors", message, StringComparison.Ordinal);

        // A negative length is refused even when the sum still matches.
        Assert.Contains("list 1 has length -1", Reject(VectorEncoding.Float32, file => Edit(file, SectionId.ListLengths, span =>
        {
            int second = BinaryPrimitives.ReadInt32LittleEndian(span[4..]);
            Add32(span, 1, -1 - second);
            Add32(span, 0, 1 + second);
        })), StringComparison.Ordinal);
    }

    [Fact]
    [Trait("Weakness", "CWE-20 input validation")]
    public void AnIdRepeatedAcrossLists_IsRejected()
    {
        using InvertedFileIndex index = PersistenceSamples.InvertedFile(VectorEncoding.ProductCodes, dimension: 2);
        int[] lengths = index.ListLengths();
        Assert.True(lengths[0] > 0 && lengths[^1] > 0, "the sample should fill the first and last lists");
        byte[] file = IndexFileBytes.Save(index);
        long first = 0;
        Edit(file, SectionId.Ids, span =>
        {
            first = BinaryPrimitives.ReadInt64LittleEndian(span);
            BinaryPrimitives.WriteInt64LittleEndian(span[^8..], first);
        });
        IndexFileBytes.FixChecksums(file);
        string message = Rejection.Assert(file).Message;
        Assert.Contains($"id {first} is stored twice (entries 0 and {index.Count - 1} in list order)", message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("Weakness", "CWE-130 length inconsistency")]
    public void ACodeSizeDisagreeingWithTheOptions_IsRejected()
    {
        using InvertedFileIndex index = PersistenceSamples.InvertedFile(VectorEncoding.ProductCodes, count: 20, dimension: 2);
        byte[] file = IndexFileBytes.Save(index);
        IndexHeader header = IndexFileBytes.CopyHeader(IndexFileBytes.Header(file));

        // One byte per code claimed for codes of two bytes: the list codes section is twice what the options allow.
        header.Integers["product-code-bytes"] = 1;
        string message = Rejection.Assert(IndexFileBytes.Compose(header, IndexFileBytes.Payloads(file))).Message;
        Assert.Contains("Index file section 'ListCodes' (id 9)", message, StringComparison.Ordinal);
        Assert.Contains("its length is 36 bytes; the header's counts require 18", message, StringComparison.Ordinal);

        header.Integers["product-code-bytes"] = 3;
        Assert.Contains("the field 'product-code-bytes' is 3, which does not divide the dimension 2", Rejection.Assert(IndexFileBytes.Compose(header, IndexFileBytes.Payloads(file))).Message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("Weakness", "CWE-20 input validation")]
    public void ScalarCodesWithNonZeroPadding_OrUnusableRanges_AreRejected()
    {
        Assert.Contains("entry 0 has non-zero padding after its 3 code bytes", Reject(VectorEncoding.Scalar8Bit, file => Edit(file, SectionId.ListCodes, span => span[5] = 1)), StringComparison.Ordinal);
        Assert.Contains("the scalar range of component 1 (minimum", Reject(VectorEncoding.Scalar8Bit, file => Edit(file, SectionId.ScalarRanges, span => BinaryPrimitives.WriteSingleLittleEndian(span[16..], -1f))), StringComparison.Ordinal);
        Assert.Contains("the scalar range of component 0 (minimum", Reject(VectorEncoding.Scalar8Bit, file => Edit(file, SectionId.ScalarRanges, span => BinaryPrimitives.WriteSingleLittleEndian(span, float.PositiveInfinity))), StringComparison.Ordinal);
    }

    [Fact]
    [Trait("Weakness", "CWE-20 input validation")]
    public void NaNInACentroidOrACodebook_OrInAStoredVector_IsRejected()
    {
        Assert.Contains("centroid 1, component 2 is NaN; centroids must be finite", Reject(VectorEncoding.Float32, file => Edit(file, SectionId.Centroids, span => BinaryPrimitives.WriteSingleLittleEndian(span[(4 * 5)..], float.NaN))), StringComparison.Ordinal);
        Assert.Contains("codebook component 300 (sub-space 1, codeword 44) is NaN", Reject(VectorEncoding.ProductCodes, file => Edit(file, SectionId.ProductCodebooks, span => BinaryPrimitives.WriteSingleLittleEndian(span[(4 * 300)..], float.NaN))), StringComparison.Ordinal);
        Assert.Contains("entry 0, component 1 is Infinity; vectors must be finite", Reject(VectorEncoding.Float32, file => Edit(file, SectionId.ListCodes, span => BinaryPrimitives.WriteSingleLittleEndian(span[4..], float.PositiveInfinity))), StringComparison.Ordinal);
        Assert.Contains("non-finite vector component (NaN) at row 1, component 0", Reject(VectorEncoding.Scalar8Bit, file => Edit(file, SectionId.Vectors, span => BinaryPrimitives.WriteSingleLittleEndian(span[(4 * 3)..], float.NaN)), rescoreDepth: 2), StringComparison.Ordinal);
    }

    [Fact]
    [Trait("Weakness", "CWE-20 input validation")]
    public void AnUntrainedHeaderOverStoredVectors_AndAMissingQuantizer_AreRejected()
    {
        using InvertedFileIndex index = PersistenceSamples.InvertedFile(VectorEncoding.Scalar8Bit);
        byte[] file = IndexFileBytes.Save(index);
        IndexHeader header = IndexFileBytes.CopyHeader(IndexFileBytes.Header(file));
        header.Integers["trained"] = 0;
        Assert.Contains("an untrained inverted file holds no vectors, but it declares 28", Rejection.Assert(IndexFileBytes.Compose(header, IndexFileBytes.Payloads(file))).Message, StringComparison.Ordinal);

        // The storage switched to float32: the scalar ranges section stands where the list lengths belong.
        header.Integers["trained"] = 1;
        header.Integers["list-storage"] = (int)VectorEncoding.Float32;
        Assert.Contains("this index kind expects 'ListLengths' (id 8) there", Rejection.Assert(IndexFileBytes.Compose(header, IndexFileBytes.Payloads(file))).Message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("Weakness", "CWE-20 input validation")]
    public void AFullVectorLocationThatDisagreesWithTheSections_IsRejected()
    {
        using InvertedFileIndex external = PersistenceSamples.InvertedFile(VectorEncoding.Scalar8Bit, rescoreDepth: 3, fullVectors: FullVectorLocation.ExternalSource);
        byte[] file = IndexFileBytes.Save(external);
        IndexHeader header = IndexFileBytes.CopyHeader(IndexFileBytes.Header(file));
        Assert.Equal(1, header.Integers["full-vector-location"]);
        Assert.DoesNotContain(IndexFileBytes.Map(file), s => s.Id == (uint)SectionId.Vectors);

        // Claimed in memory, but no vectors stored; and a value that names no location.
        header.Integers.Remove("full-vector-location");
        Rejection.Assert(IndexFileBytes.Compose(header, IndexFileBytes.Payloads(file)));
        header.Integers["full-vector-location"] = 2;
        Assert.Contains("the field 'full-vector-location' is 2; expected a value in [0, 1]", Rejection.Assert(IndexFileBytes.Compose(header, IndexFileBytes.Payloads(file))).Message, StringComparison.Ordinal);

        // Claimed external over a file that stores the vectors.
        using InvertedFileIndex memory = PersistenceSamples.InvertedFile(VectorEncoding.Scalar8Bit, rescoreDepth: 3);
        byte[] withVectors = IndexFileBytes.Save(memory);
        IndexHeader memoryHeader = IndexFileBytes.CopyHeader(IndexFileBytes.Header(withVectors));
        Assert.False(memoryHeader.Integers.ContainsKey("full-vector-location"));
        memoryHeader.Integers["full-vector-location"] = 1;
        Rejection.Assert(IndexFileBytes.Compose(memoryHeader, IndexFileBytes.Payloads(withVectors)));
    }

    [Fact]
    [Trait("Weakness", "CWE-20 input validation")]
    public void ABrokenOrMisplacedRotation_IsRejected()
    {
        using InvertedFileIndex rotated = PersistenceSamples.InvertedFile(VectorEncoding.ProductCodes, dimension: 4, rotation: SubspaceRotation.VarianceBalanced);
        byte[] file = IndexFileBytes.Save(rotated);
        using (var loaded = IndexFile.Load<InvertedFileIndex>(new MemoryStream(file), IndexLoadOptions.Untrusted))
        {
            Assert.Equal(SubspaceRotation.VarianceBalanced, loaded.Options.ProductCodeRotation);
        }

        Assert.Contains("rotation row 0, column 1 is NaN; the rotation must be finite", Damaged(file, f => Edit(f, SectionId.ProductRotation, span => BinaryPrimitives.WriteSingleLittleEndian(span[4..], float.NaN))), StringComparison.Ordinal);
        Assert.Contains("rotation row 1 has squared length 4; an orthogonal rotation has rows of length 1", Damaged(file, f => Edit(f, SectionId.ProductRotation, span =>
        {
            for (int j = 4; j < 8; j++)
            {
                BinaryPrimitives.WriteSingleLittleEndian(span[(4 * j)..], 2 * BinaryPrimitives.ReadSingleLittleEndian(span[(4 * j)..]));
            }
        })), StringComparison.Ordinal);

        // Without the field (as a reader that predates rotations sees the file), the rotation stands where the lists
        // belong (such a reader names the section "id 13").
        IndexHeader header = IndexFileBytes.CopyHeader(IndexFileBytes.Header(file));
        header.Integers.Remove("product-rotation");
        Assert.Contains("section 2 is 'ProductRotation' (id 13); this index kind expects 'ListLengths' (id 8) there", Rejection.Assert(IndexFileBytes.Compose(header, IndexFileBytes.Payloads(file))).Message, StringComparison.Ordinal);
        header.Integers["product-rotation"] = 5;
        Assert.Contains("the field 'product-rotation' is 5; expected a value in [0, 1]", Rejection.Assert(IndexFileBytes.Compose(header, IndexFileBytes.Payloads(file))).Message, StringComparison.Ordinal);

        // The field on a file without the section.
        using InvertedFileIndex plain = PersistenceSamples.InvertedFile(VectorEncoding.ProductCodes, dimension: 4);
        byte[] plainFile = IndexFileBytes.Save(plain);
        IndexHeader plainHeader = IndexFileBytes.CopyHeader(IndexFileBytes.Header(plainFile));
        plainHeader.Integers["product-rotation"] = 1;
        Assert.Contains("this index kind expects 'ProductRotation' (id 13) there", Rejection.Assert(IndexFileBytes.Compose(plainHeader, IndexFileBytes.Payloads(plainFile))).Message, StringComparison.Ordinal);
    }

    private static string Damaged(byte[] original, Action<byte[]> damage)
    {
        byte[] file = (byte[])original.Clone();
        damage(file);
        IndexFileBytes.FixChecksums(file);
        return Rejection.Assert(file).Message;
    }

    private static string Reject(VectorEncoding storage, Action<byte[]> damage, int rescoreDepth = 0)
    {
        using InvertedFileIndex index = PersistenceSamples.InvertedFile(storage, DistanceMetric.SquaredEuclidean, dimension: storage == VectorEncoding.ProductCodes ? 2 : 3, rescoreDepth: rescoreDepth);
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

    private static void Add32(Span<byte> payload, int index, int delta)
    {
        Span<byte> at = payload[(4 * index)..];
        BinaryPrimitives.WriteInt32LittleEndian(at, BinaryPrimitives.ReadInt32LittleEndian(at) + delta);
    }
}
