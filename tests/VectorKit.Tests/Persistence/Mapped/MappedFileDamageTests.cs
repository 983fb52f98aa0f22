using System.Buffers.Binary;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Persistence;

namespace VectorKit.Tests.Persistence.Mapped;

/// <summary>
/// Damaged and crafted files opened mapped: cuts, frames and lengths that disagree, trailing bytes, and id orders that
/// point outside the file or are out of order. Opening must fail with <see cref="IndexFileException"/>, or (without
/// <see cref="MappedOpenOptions.VerifyContents"/>, for damage only a full pass can see) the index must stay memory-safe:
/// lookups that meet an impossible row number fail with <see cref="InvalidDataException"/>, never read outside the map.
/// </summary>
public sealed class MappedFileDamageTests : IDisposable
{
    private readonly TempFolder _folder = new();

    public void Dispose() => _folder.Dispose();

    [Fact]
    [Trait("Weakness", "CWE-125 out-of-bounds read")]
    public void ACutAtEveryLength_IsRejected()
    {
        byte[] file = Save(PersistenceSamples.Exact(count: 9, dimension: 3));
        for (int length = 0; length < file.Length; length++)
        {
            string path = _folder.Write(file[..length]);
            IndexFileException e = Assert.Throws<IndexFileException>(() => IndexFile.OpenMapped<ExactIndex>(path).Dispose());
            Assert.Equal(Path.GetFullPath(path), e.FilePath);
            Assert.True(
                e.Message.Contains("truncated", StringComparison.Ordinal) || e.Message.Contains("not recognised", StringComparison.Ordinal),
                $"cut at {length}: {e.Message}");
        }
    }

    [Fact]
    [Trait("Weakness", "CWE-130 length inconsistency")]
    public void TrailingBytes_AndAFrameThatDisagreesWithTheHeader_AreRejected()
    {
        byte[] file = Save(PersistenceSamples.Exact(count: 9, dimension: 3));
        Assert.Contains("1 unexpected bytes after its last section", Reject([.. file, 0]).Message, StringComparison.Ordinal);

        byte[] frame = (byte[])file.Clone();
        SectionSpan vectors = IndexFileBytes.Map(frame).Single(s => s.Id == (uint)SectionId.Vectors);
        BinaryPrimitives.WriteInt64LittleEndian(frame.AsSpan((int)vectors.FrameStart + 8), 12);
        Assert.Contains("the header lists 'Vectors' (id 2) with flags 0, length 108", Reject(frame).Message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("Weakness", "CWE-125 out-of-bounds read")]
    public void AnIdOrderNamingARowOutsideTheFile_IsCaughtAtOpenWhenVerifying_AndOnUseOtherwise()
    {
        byte[] file = Save(PersistenceSamples.Exact(count: 9, dimension: 3));
        EditIdOrder(file, order => BinaryPrimitives.WriteInt32LittleEndian(order[(4 * 4)..], 1_000_000));

        IndexFileException e = Reject(file, MappedOpenOptions.Untrusted);
        Assert.Equal("IdOrder", e.Section);
        Assert.Contains("the id order names row 1000000 at position 4; the file has 9 rows", e.Message, StringComparison.Ordinal);

        using ExactIndex mapped = IndexFile.OpenMapped<ExactIndex>(_folder.Write(file));
        InvalidDataException lookup = Assert.Throws<InvalidDataException>(() => mapped.Contains(1000 + (4 * 7)));
        Assert.Contains("names row 1000000", lookup.Message, StringComparison.Ordinal);

        // A negative row number is out of range too.
        EditIdOrder(file, order => BinaryPrimitives.WriteInt32LittleEndian(order[(4 * 4)..], -3));
        using ExactIndex negative = IndexFile.OpenMapped<ExactIndex>(_folder.Write(file));
        Assert.Throws<InvalidDataException>(() => negative.Contains(1000 + (4 * 7)));
    }

    [Fact]
    [Trait("Weakness", "CWE-20 input validation")]
    public void AnIdOrderOutOfOrder_IsCaughtWhenVerifying_AndNeverGivesAWrongRowOtherwise()
    {
        byte[] file = Save(PersistenceSamples.Exact(count: 9, dimension: 3));
        EditIdOrder(file, order =>
        {
            int a = BinaryPrimitives.ReadInt32LittleEndian(order[4..]);
            int b = BinaryPrimitives.ReadInt32LittleEndian(order[24..]);
            BinaryPrimitives.WriteInt32LittleEndian(order[4..], b);
            BinaryPrimitives.WriteInt32LittleEndian(order[24..], a);
        });

        Assert.Contains("the id order is not strictly ascending at position", Reject(file, MappedOpenOptions.Untrusted).Message, StringComparison.Ordinal);

        // Unverified: a lookup may miss, but a row it finds has the id asked for, and TryGetVector reads that row.
        using ExactIndex truth = PersistenceSamples.Exact(count: 9, dimension: 3);
        using ExactIndex mapped = IndexFile.OpenMapped<ExactIndex>(_folder.Write(file));
        var expected = new float[3];
        var actual = new float[3];
        foreach (long id in truth.GetIds())
        {
            if (mapped.TryGetVector(id, actual))
            {
                Assert.True(truth.TryGetVector(id, expected));
                Assert.Equal(expected, actual);
            }
        }

        Assert.False(mapped.Contains(1001));
    }

    [Fact]
    [Trait("Weakness", "CWE-20 input validation")]
    public void DamageInABulkSection_IsCaughtByItsChecksumWhenVerifying()
    {
        byte[] file = Save(PersistenceSamples.Exact(count: 9, dimension: 3));
        SectionSpan vectors = IndexFileBytes.Map(file).Single(s => s.Id == (uint)SectionId.Vectors);
        file[vectors.PayloadStart + 5] ^= 0x10;
        Assert.Contains("section 'Vectors' (id 2) is damaged: the checksum", Reject(file, MappedOpenOptions.Untrusted).Message, StringComparison.Ordinal);

        // Re-checksummed, a non-finite component is caught by the verification's finite check.
        BinaryPrimitives.WriteSingleLittleEndian(file.AsSpan((int)vectors.PayloadStart + 8), float.NaN);
        IndexFileBytes.FixChecksums(file);
        Assert.Contains("non-finite vector component at row 0, component 2", Reject(file, MappedOpenOptions.Untrusted).Message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("Weakness", "fuzz (CWE-20, CWE-125, CWE-400)")]
    public void MutatedFiles_OpenAndWork_OrRaiseIndexFileException()
    {
        var corpus = new List<byte[]>();
        foreach (string name in new[] { "exact", "exact-cosine", "exact-scalar", "exact-scalar-full", "exact-scalar-external" })
        {
            corpus.Add(IndexFileDamageTests.Sample(name));
        }

        MappedChecks.OpenMutations(corpus, 400, 20261203, _folder.Write);
    }

    private static void EditIdOrder(byte[] file, SpanAction edit)
    {
        SectionSpan order = IndexFileBytes.Map(file).Single(s => s.Id == (uint)SectionId.IdOrder);
        edit(file.AsSpan((int)order.PayloadStart, (int)order.Length));
        IndexFileBytes.FixChecksums(file);
    }

    private static byte[] Save(IVectorIndex index)
    {
        using (index)
        {
            return IndexFileBytes.Save(index);
        }
    }

    private IndexFileException Reject(byte[] file, MappedOpenOptions? options = null)
        => Assert.Throws<IndexFileException>(() => IndexFile.OpenMapped<ExactIndex>(_folder.Write(file), options).Dispose());

    private delegate void SpanAction(Span<byte> span);
}
