using VectorKit.IO;
using Xunit;

namespace VectorKit.Tests.IO;

/// <summary>Hostile and corrupt files: each must raise <see cref="DataFormatException"/> with a precise message, before any large allocation.</summary>
public sealed class MalformedInputTests
{
    private static readonly byte[] ValidNpy = NpyFileTests.Npy("<f4", "(2, 3)", new byte[24]);

    [Theory]
    [Trait("CWE", "CWE-20")]
    [InlineData(0, "truncated while reading the magic and version")]
    [InlineData(5, "truncated while reading the magic and version")]
    [InlineData(9, "truncated while reading the header length")]
    [InlineData(40, "header length 118 exceeds the 30 bytes that remain")]
    [InlineData(128, "but only 0 bytes remain; the file is truncated")]
    [InlineData(140, "but only 12 bytes remain; the file is truncated")]
    public void Truncated_npy_is_rejected_at_every_stage(int length, string expected)
    {
        DataFormatException e = Assert.Throws<DataFormatException>(() => NpyFile.ReadVectors(new MemoryStream(ValidNpy[..length])));
        Assert.StartsWith("npy: ", e.Message, StringComparison.Ordinal);
        Assert.Contains(expected, e.Message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("CWE", "CWE-20")]
    public void Truncated_npy_data_on_a_stream_without_length_is_rejected_when_reached()
    {
        DataFormatException e = Assert.Throws<DataFormatException>(() => NpyFile.ReadVectors(new TrickleStream(ValidNpy[..140])));
        Assert.Contains("truncated while reading the values of row 0", e.Message, StringComparison.Ordinal);
        Assert.Contains("expected 24 bytes, found 12", e.Message, StringComparison.Ordinal);
    }

    [Theory]
    [Trait("CWE", "CWE-20")]
    [InlineData("{'descr': '<f4', 'fortran_order': True, 'shape': (2, 3), }", "'fortran_order': True (column-major) arrays are not supported")]
    [InlineData("{'descr': '<c8', 'fortran_order': False, 'shape': (2, 3), }", "dtype '<c8' is not supported")]
    [InlineData("{'descr': '=f4', 'fortran_order': False, 'shape': (2, 3), }", "dtype '=f4' is not supported")]
    [InlineData("{'descr': '|f4', 'fortran_order': False, 'shape': (2, 3), }", "dtype '|f4' is not supported")]
    [InlineData("{'descr': '<f4', 'fortran_order': False, 'shape': (2, 3), 'extra': 1}", "unknown key 'extra'")]
    [InlineData("{'descr': '<f4', 'descr': '<f4', 'fortran_order': False, 'shape': (2, 3)}", "repeats the key 'descr'")]
    [InlineData("{'descr': '<f4', 'shape': (2, 3)}", "must contain 'descr', 'fortran_order' and 'shape'")]
    [InlineData("{'descr': '<f4', 'fortran_order': False, 'shape': (-3, 4), }", "expected a non-negative integer, found '-'")]
    [InlineData("{'descr': '<f4', 'fortran_order': false, 'shape': (2, 3), }", "expected True or False")]
    [InlineData("{'descr': '<f4', 'fortran_order': False, 'shape': (2, 3), } junk", "unexpected 'j' after the header dictionary")]
    [InlineData("{'descr': '<f4', 'fortran_order': False, 'shape': (), }", "0-d (scalar) array")]
    [InlineData("not a dict", "expected '{'")]
    public void Bad_npy_headers_are_rejected(string dict, string expected)
    {
        byte[] file = NpyFileTests.NpyRaw(dict, new byte[24]);
        DataFormatException e = Assert.Throws<DataFormatException>(() => NpyFile.ReadVectors(new MemoryStream(file)));
        Assert.StartsWith("npy: ", e.Message, StringComparison.Ordinal);
        Assert.Contains(expected, e.Message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("CWE", "CWE-20")]
    public void Wrong_magic_and_version_are_rejected()
    {
        byte[] bad = (byte[])ValidNpy.Clone();
        bad[1] = (byte)'X';
        DataFormatException e = Assert.Throws<DataFormatException>(() => NpyFile.ReadVectors(new MemoryStream(bad)));
        Assert.Contains("npy: wrong magic 9358554D5059; expected 934E554D5059", e.Message, StringComparison.Ordinal);

        byte[] v9 = (byte[])ValidNpy.Clone();
        v9[6] = 9;
        e = Assert.Throws<DataFormatException>(() => NpyFile.ReadVectors(new MemoryStream(v9)));
        Assert.Contains("format version 9.0 is not supported", e.Message, StringComparison.Ordinal);

        e = Assert.Throws<DataFormatException>(() => IdxFile.ReadVectors(new MemoryStream([0x01, 0x00, 0x08, 0x01, 0, 0, 0, 0])));
        Assert.Contains("idx: wrong magic 01000801", e.Message, StringComparison.Ordinal);

        e = Assert.Throws<DataFormatException>(() => IdxFile.ReadVectors(new MemoryStream([0x00, 0x00, 0x07, 0x01, 0, 0, 0, 0])));
        Assert.Contains("unknown type code 0x07", e.Message, StringComparison.Ordinal);

        e = Assert.Throws<DataFormatException>(() => IdxFile.ReadVectors(new MemoryStream([0x00, 0x00, 0x08, 0x00])));
        Assert.Contains("rank 0 is not supported", e.Message, StringComparison.Ordinal);
    }

    [Theory]
    [Trait("CWE", "CWE-789")]
    [InlineData(true, "the header claims 1000000000000 rows of dimension 4 (16000000000000 bytes of data) but only 16 bytes remain")]
    [InlineData(false, "the header claims 1000000000000 rows; the limit is 2147483647")]
    public void Npy_header_claiming_a_trillion_rows_is_rejected_before_allocating(bool seekable, string expected)
    {
        byte[] file = NpyFileTests.Npy("<f4", "(1000000000000, 4)", new byte[16]);
        Stream source = seekable ? new MemoryStream(file) : new TrickleStream(file);
        DataFormatException e = Assert.Throws<DataFormatException>(() => NpyFile.ReadVectors(source));
        Assert.Contains(expected, e.Message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("CWE", "CWE-789")]
    public void Npy_version_2_header_length_of_4_GiB_is_rejected()
    {
        byte[] file = [0x93, (byte)'N', (byte)'U', (byte)'M', (byte)'P', (byte)'Y', 2, 0, 0xF0, 0xFF, 0xFF, 0xFF];
        DataFormatException e = Assert.Throws<DataFormatException>(() => NpyFile.ReadVectors(new TrickleStream(file)));
        Assert.Contains("header length 4294967280 exceeds the limit of 1048576 bytes", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("CWE", "CWE-789")]
    public void Gzip_idx_claiming_millions_of_images_fails_on_the_missing_data_not_on_memory()
    {
        // 2 000 000 images of 28×28 would be 6 GB of floats; the compressed stream has no length to check against,
        // so the reader must grow with the data actually present and stop at the truncation.
        byte[] header = [0x00, 0x00, 0x08, 0x03, 0x00, 0x1E, 0x84, 0x80, 0, 0, 0, 28, 0, 0, 0, 28, 1, 2, 3];
        DataFormatException e = Assert.Throws<DataFormatException>(() => IdxFile.ReadVectors(new MemoryStream(IdxFileTests.Gzip(header))));
        Assert.Contains("idx: the data is truncated while reading the values of row 0", e.Message, StringComparison.Ordinal);
        Assert.Contains("found 3", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("CWE", "CWE-789")]
    public void Limits_cap_dimension_and_rows()
    {
        var strict = new DataReadLimits { MaxDimension = 4, MaxRows = 1 };
        DataFormatException e = Assert.Throws<DataFormatException>(() => IdxFile.ReadVectors(new MemoryStream(IdxFileTests.Images), strict));
        Assert.Contains("dimension 6 is outside the supported range 1..4", e.Message, StringComparison.Ordinal);

        var fewRows = new DataReadLimits { MaxRows = 1 };
        e = Assert.Throws<DataFormatException>(() => IdxFile.ReadVectors(new MemoryStream(IdxFileTests.Images), fewRows));
        Assert.Contains("the header claims 2 rows; the limit is 1", e.Message, StringComparison.Ordinal);
    }

    [Theory]
    [Trait("CWE", "CWE-190")]
    [InlineData("(4611686018427387904, 4)", "4611686018427387904 rows of dimension 4 overflow a 64-bit byte count")]
    [InlineData("(2, 4294967296, 4294967296)", "dimension 9223372036854775807 is outside the supported range")]
    [InlineData("(2, 65536, 65536)", "dimension 4294967296 is outside the supported range 1..16777216")]
    [InlineData("(2, 0)", "dimension 0 is outside the supported range")]
    [InlineData("(99999999999999999999, 4)", "a shape entry is too large")]
    public void Npy_shape_arithmetic_cannot_overflow(string shape, string expected)
    {
        byte[] file = NpyFileTests.Npy("<f4", shape, new byte[16]);
        DataFormatException e = Assert.Throws<DataFormatException>(() => NpyFile.ReadVectors(new TrickleStream(file)));
        Assert.Contains(expected, e.Message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("CWE", "CWE-190")]
    public void Idx_sizes_whose_product_overflows_int32_are_rejected()
    {
        byte[] file = [0x00, 0x00, 0x08, 0x03, 0, 0, 0, 1, 0x00, 0x01, 0x00, 0x00, 0x00, 0x01, 0x00, 0x00];
        DataFormatException e = Assert.Throws<DataFormatException>(() => IdxFile.ReadVectors(new MemoryStream(file)));
        Assert.Contains("dimension 4294967296 is outside the supported range", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("CWE", "CWE-190")]
    public void Int64_ids_outside_int32_are_rejected()
    {
        byte[] data = BitConverter.GetBytes(long.MaxValue);
        if (!BitConverter.IsLittleEndian)
        {
            Array.Reverse(data);
        }

        DataFormatException e = Assert.Throws<DataFormatException>(() => NpyFile.ReadIntegers(new MemoryStream(NpyFileTests.Npy("<i8", "(1,)", data))));
        Assert.Contains("a 64-bit value does not fit in int32", e.Message, StringComparison.Ordinal);
    }

    [Theory]
    [Trait("CWE", "CWE-20")]
    [InlineData(-5)]
    [InlineData(0)]
    [InlineData(16777217)]
    public void Vecs_dimension_out_of_range_is_rejected(int dimension)
    {
        byte[] file = [.. BitConverter.GetBytes(dimension), 0, 0, 0, 0];
        DataFormatException e = Assert.Throws<DataFormatException>(() => VecsFile.ReadFvecs(new MemoryStream(file)));
        Assert.Contains($"fvecs: dimension {dimension} is outside the supported range 1..16777216", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("CWE", "CWE-20")]
    public void Negative_idx_size_is_rejected()
    {
        byte[] file = [0x00, 0x00, 0x08, 0x02, 0, 0, 0, 1, 0xFF, 0xFF, 0xFF, 0xFB, 1];
        DataFormatException e = Assert.Throws<DataFormatException>(() => IdxFile.ReadVectors(new MemoryStream(file)));
        Assert.Contains("idx: size 1 is negative (-5) (at byte offset 8)", e.Message, StringComparison.Ordinal);
    }

    [Theory]
    [Trait("CWE", "CWE-20")]
    [InlineData(true)]
    [InlineData(false)]
    public void Ragged_fvecs_names_the_row_and_both_dimensions(bool seekable)
    {
        var stream = new MemoryStream();
        VecsFile.WriteFvecs(stream, [1f, 2f, 3f, 4f, 5f, 6f], 3);
        VecsFile.WriteFvecs(stream, [7f, 8f], 2);
        DataFormatException e = Assert.Throws<DataFormatException>(() => VecsFile.ReadFvecs(VecsFileTests.Source(stream, seekable)));
        Assert.Contains("fvecs: row 2 has dimension 2 but row 0 has dimension 3", e.Message, StringComparison.Ordinal);
        Assert.Contains("at byte offset 32", e.Message, StringComparison.Ordinal);
    }

    // Found with the fuzz harness's allocation measure (fuzz/corpus/npy/regression-zero-rows-wide): ReadBlocks
    // allocated rowsPerBlock × dimension elements before reading, 448 MiB for these 128 bytes with 7-row blocks.
    [Theory]
    [Trait("CWE", "CWE-789")]
    [InlineData(true)]
    [InlineData(false)]
    public void Reading_blocks_allocates_only_for_rows_the_file_holds(bool seekable)
    {
        byte[] file = NpyFileTests.Npy("<f4", "(0, 16777216)", []);
        using var reader = new NpyReader(seekable ? new MemoryStream(file) : new TrickleStream(file, 4096));
        long before = GC.GetAllocatedBytesForCurrentThread();
        Assert.Empty(reader.ReadBlocks(64));
        Assert.True(GC.GetAllocatedBytesForCurrentThread() - before < 1 << 20, "a file with no rows allocated a block");

        // With rows, blocks still come whole and in order (the block grows as rows arrive when nothing checked them).
        float[] data = [.. Enumerable.Range(0, 5 * 3).Select(i => (float)i)];
        var stream = new MemoryStream();
        NpyFile.Write(stream, data, 3);
        byte[] five = stream.ToArray();
        using var rows = new NpyReader(seekable ? new MemoryStream(five) : new TrickleStream(five, 7));
        List<VectorSet> blocks = [.. rows.ReadBlocks(2)];
        Assert.Equal([2, 2, 1], blocks.Select(b => b.Count));
        Assert.Equal(data, blocks.SelectMany(b => b.Data));
    }

    // Found with the fuzz harness's allocation measure (fuzz/corpus/fvecs/regression-wide-truncated): a 20-byte .fvecs
    // whose first row claims 2^24 components had a 64 MiB row allocated before the truncation was noticed, although
    // the length was known.
    [Fact]
    [Trait("CWE", "CWE-789")]
    public void Fvecs_shorter_than_its_first_row_is_rejected_before_allocating_the_row()
    {
        byte[] file = [.. BitConverter.GetBytes(1 << 24), .. new byte[16]];
        long before = GC.GetAllocatedBytesForCurrentThread();
        DataFormatException e = Assert.Throws<DataFormatException>(() => VecsFile.ReadFvecs(new MemoryStream(file)));
        Assert.True(GC.GetAllocatedBytesForCurrentThread() - before < 1 << 20, "the row was allocated before the truncation was reported");
        Assert.Contains("fvecs: the data is truncated while reading the values of row 0 at byte offset 4: expected 67108864 bytes, found 16", e.Message, StringComparison.Ordinal);
    }

    [Theory]
    [Trait("CWE", "CWE-20")]
    [InlineData(2, "the dimension of row 0")]
    [InlineData(10, "the values of row 0")]
    [InlineData(18, "the dimension of row 1")]
    [InlineData(20, "the values of row 1")]
    public void Truncated_fvecs_is_rejected(int length, string what)
    {
        var stream = new MemoryStream();
        VecsFile.WriteFvecs(stream, [1f, 2f, 3f, 4f, 5f, 6f], 3);
        byte[] cut = stream.ToArray()[..length];
        foreach (Stream source in new Stream[] { new MemoryStream(cut), new TrickleStream(cut) })
        {
            DataFormatException e = Assert.Throws<DataFormatException>(() => VecsFile.ReadFvecs(source));
            Assert.Contains($"fvecs: the data is truncated while reading {what}", e.Message, StringComparison.Ordinal);
        }
    }

    [Theory]
    [Trait("CWE", "CWE-20")]
    [InlineData(3)]
    [InlineData(9)]
    [InlineData(18)]
    public void Truncated_idx_is_rejected_plain_and_gzip(int length)
    {
        byte[] cut = IdxFileTests.Images[..length];
        DataFormatException plain = Assert.Throws<DataFormatException>(() => IdxFile.ReadVectors(new MemoryStream(cut)));
        Assert.Contains("idx:", plain.Message, StringComparison.Ordinal);
        Assert.Contains("truncated", plain.Message, StringComparison.Ordinal);
        DataFormatException gzip = Assert.Throws<DataFormatException>(() => IdxFile.ReadVectors(new MemoryStream(IdxFileTests.Gzip(cut))));
        Assert.Contains("truncated", gzip.Message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("CWE", "CWE-20")]
    public void Corrupt_gzip_is_a_data_format_error()
    {
        byte[] gz = IdxFileTests.Gzip(IdxFileTests.Images);
        for (int i = 10; i < gz.Length - 8; i++)
        {
            gz[i] ^= 0x5A;
        }

        DataFormatException e = Assert.Throws<DataFormatException>(() => IdxFile.ReadVectors(new MemoryStream(gz)));
        Assert.StartsWith("idx: ", e.Message, StringComparison.Ordinal);
    }

    [Theory]
    [Trait("CWE", "CWE-20")]
    [InlineData("1,2,3\n4,5\n", "CSV: line 2 has 2 values but line 1 has 3")]
    [InlineData("h\n1,2\n\n3,4,5\n", "CSV: line 4 has more than 2 values but line 2 has 2")]
    [InlineData("1,2\n3,x\n", "CSV: line 2, value 2: 'x' is not a number")]
    [InlineData("1,,2\n", "CSV: line 1, value 2: '' is not a number")]
    [InlineData("1,2\n3,4,\n", "CSV: line 2, value 3: '' is not a number")]
    public void Malformed_csv_names_the_line(string text, string expected)
    {
        var options = new CsvVectorOptions { HasHeader = text.StartsWith('h') };
        DataFormatException e = Assert.Throws<DataFormatException>(() => CsvVectors.Read(new StringReader(text), options));
        Assert.Contains(expected, e.Message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("CWE", "CWE-789")]
    public void Csv_line_wider_than_the_dimension_limit_is_rejected()
    {
        string line = string.Join(',', Enumerable.Repeat("1", 10));
        DataFormatException e = Assert.Throws<DataFormatException>(
            () => CsvVectors.Read(new StringReader(line), limits: new DataReadLimits { MaxDimension = 8 }));
        Assert.Contains("line 1 has more than 8 values (the dimension limit)", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Exceptions_are_library_exceptions()
    {
        Assert.IsAssignableFrom<IOException>(new DataFormatException("x"));
    }
}
