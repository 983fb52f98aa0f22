using System.Buffers.Binary;
using VectorKit.Indexes;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Persistence;

namespace VectorKit.Tests.Persistence.Mapped;

/// <summary>
/// Damaged and crafted inverted-file files opened mapped: cuts, list lengths that do not fit the sections (with valid
/// checksums), id orders pointing outside the file, and mutated bytes. Opening fails with
/// <see cref="IndexFileException"/>, or the index stays memory-safe: list starts come only from lengths checked
/// against the sections at open, and an unverified id order's impossible row is refused on use.
/// </summary>
public sealed class MappedInvertedFileDamageTests : IDisposable
{
    private readonly TempFolder _folder = new();

    public void Dispose() => _folder.Dispose();

    [Theory]
    [InlineData("scalar-full")]
    [InlineData("fast-scan")]
    [Trait("Weakness", "CWE-125 out-of-bounds read")]
    public void ACutAtEveryLength_IsRejected(string variant)
    {
        byte[] file = Save(variant, count: 40);
        for (int length = 0; length < file.Length; length += 7)
        {
            string path = _folder.Write(file[..length]);
            IndexFileException e = Assert.Throws<IndexFileException>(() => IndexFile.OpenMapped(path).Dispose());
            Assert.True(
                e.Message.Contains("truncated", StringComparison.Ordinal) || e.Message.Contains("not recognised", StringComparison.Ordinal),
                $"cut at {length}: {e.Message}");
        }
    }

    [Theory]
    [InlineData("scalar-full")]
    [InlineData("fast-scan")]
    [Trait("Weakness", "CWE-130 length inconsistency")]
    public void ListLengthsThatDoNotFitTheSections_AreRejectedAtOpen_WithValidChecksums(string variant)
    {
        byte[] file = Save(variant, count: 120);

        // A negative length, balanced by another so the sum still matches the count.
        byte[] negative = EditLengths(file, lengths => { lengths[1] += lengths[0] + 5; lengths[0] = -5; });
        Assert.Contains("length -5", Reject(negative).Message, StringComparison.Ordinal);

        // A sum beyond the entries the sections hold.
        byte[] longer = EditLengths(file, lengths => lengths[3] += 1_000_000);
        IndexFileException e = Reject(longer);
        Assert.True(e.Section == "ListLengths", e.Message);
        Assert.Contains("the list lengths add up to", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("Weakness", "CWE-130 length inconsistency")]
    public void FastScanBlocksWhoseLengthDisagreesWithTheListLengths_AreRejected()
    {
        // Moving 31 entries from a list to another keeps the sum but changes how many whole blocks the lists take.
        byte[] file = Save("fast-scan", count: 200);
        int[] before = Lengths(file);
        int from = Array.FindIndex(before, l => l % 32 is >= 1 and <= 31 && l >= 31);
        Assert.True(from >= 0, "no list to move entries out of");
        int to = from == 0 ? 1 : 0;
        byte[] moved = EditLengths(file, lengths => { lengths[from] -= 31; lengths[to] += 31; });
        if (FastScanBytes(Lengths(moved)) != FastScanBytes(before))
        {
            IndexFileException e = Reject(moved);
            Assert.Equal("FastScanBlocks", e.Section);
            Assert.Contains("the list lengths require", e.Message, StringComparison.Ordinal);
        }
        else
        {
            // Same block count: the entries change lists, which is wrong but stays inside the sections.
            using IVectorIndex mapped = IndexFile.OpenMapped(_folder.Write(moved));
            mapped.Search(new float[8], 5, new SearchOptions { SearchWidth = 16 });
        }
    }

    [Fact]
    [Trait("Weakness", "CWE-125 out-of-bounds read")]
    public void AnIdOrderNamingAnEntryOutsideTheFile_IsCaughtAtOpenWhenVerifying_AndOnUseOtherwise()
    {
        byte[] file = Save("scalar-full", count: 30);
        SectionSpan order = IndexFileBytes.Map(file).Single(s => s.Id == (uint)SectionId.IdOrder);
        BinaryPrimitives.WriteInt32LittleEndian(file.AsSpan((int)order.PayloadStart + 8), 1_000_000);
        IndexFileBytes.FixChecksums(file);

        IndexFileException e = Reject(file, MappedOpenOptions.Untrusted);
        Assert.Equal("IdOrder", e.Section);
        Assert.Contains("the id order names row 1000000 at position 2; the file has 28 rows", e.Message, StringComparison.Ordinal);

        using IVectorIndex mapped = IndexFile.OpenMapped(_folder.Write(file));
        long[] ids = mapped.GetIds();
        Assert.Throws<InvalidDataException>(() => ids.Select(mapped.Contains).ToArray());
    }

    [Fact]
    [Trait("Weakness", "CWE-354 integrity check")]
    public void DamageInTheListCodes_IsCaughtByItsChecksumWhenVerifying()
    {
        byte[] file = Save("scalar-full", count: 30);
        SectionSpan codes = IndexFileBytes.Map(file).Single(s => s.Id == (uint)SectionId.ListCodes);
        file[codes.PayloadStart + 3] ^= 0x40;
        Assert.Contains("section 'ListCodes' (id 9) is damaged: the checksum", Reject(file, MappedOpenOptions.Untrusted).Message, StringComparison.Ordinal);

        // Re-checksummed, the 8-bit padding after the code is checked by the verification pass as by a load.
        SectionSpan again = IndexFileBytes.Map(file).Single(s => s.Id == (uint)SectionId.ListCodes);
        file[again.PayloadStart + 12] = 7;
        IndexFileBytes.FixChecksums(file);
        Assert.Contains("has non-zero padding after its 8 code bytes", Reject(file, MappedOpenOptions.Untrusted).Message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("Weakness", "fuzz (CWE-20, CWE-125, CWE-400)")]
    public void MutatedFiles_OpenAndWork_OrRaiseIndexFileException()
    {
        var corpus = new List<byte[]>();
        foreach (string variant in new[] { "float32-l2", "scalar-full", "product", "fast-scan", "fast-scan-full-ip", "product-rotated-full" })
        {
            corpus.Add(Save(variant, count: 50));
        }

        MappedChecks.OpenMutations(corpus, 300, 20261204, _folder.Write);
    }

    private static byte[] Save(string variant, int count)
    {
        using InvertedFileIndex index = MappedInvertedFileTests.Build(variant, count, seed: 4);
        return IndexFileBytes.Save(index);
    }

    private static int[] Lengths(byte[] file)
    {
        SectionSpan section = IndexFileBytes.Map(file).Single(s => s.Id == (uint)SectionId.ListLengths);
        var lengths = new int[section.Length / sizeof(int)];
        for (int i = 0; i < lengths.Length; i++)
        {
            lengths[i] = BinaryPrimitives.ReadInt32LittleEndian(file.AsSpan((int)section.PayloadStart + (i * sizeof(int))));
        }

        return lengths;
    }

    private static byte[] EditLengths(byte[] file, Action<int[]> edit)
    {
        byte[] copy = (byte[])file.Clone();
        int[] lengths = Lengths(copy);
        edit(lengths);
        SectionSpan section = IndexFileBytes.Map(copy).Single(s => s.Id == (uint)SectionId.ListLengths);
        for (int i = 0; i < lengths.Length; i++)
        {
            BinaryPrimitives.WriteInt32LittleEndian(copy.AsSpan((int)section.PayloadStart + (i * sizeof(int))), lengths[i]);
        }

        IndexFileBytes.FixChecksums(copy);
        return copy;
    }

    // Whole blocks of 32 entries, 2 code bytes each (the fast-scan variant's code size).
    private static long FastScanBytes(int[] lengths) => lengths.Sum(l => (l + 31L) / 32 * 32 * 2);

    private IndexFileException Reject(byte[] file, MappedOpenOptions? options = null)
        => Assert.Throws<IndexFileException>(() => IndexFile.OpenMapped(_folder.Write(file), options).Dispose());
}
