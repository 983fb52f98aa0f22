using System.Buffers.Binary;
using System.Text;
using FsCheck;
using FsCheck.Xunit;
using VectorKit.IO;
using Xunit;

namespace VectorKit.Tests.IO;

/// <summary>
/// .npy files are built here byte by byte from the published format description (NEP 1 and the numpy
/// "format" module docs): magic "\x93NUMPY", major and minor version bytes, a little-endian header length
/// (uint16 in 1.0, uint32 in 2.0/3.0), then an ASCII Python dict with 'descr', 'fortran_order' and 'shape',
/// padded with spaces and ended by '\n' so the data starts on a 64-byte boundary.
/// </summary>
public sealed class NpyFileTests
{
    [Fact]
    public void Hand_written_version_1_float32_file_reads_correctly()
    {
        // The header dict is 59 characters; 10 preamble bytes + 59 + 58 spaces + '\n' = 128, a multiple of 64.
        string dict = "{'descr': '<f4', 'fortran_order': False, 'shape': (2, 3), }";
        var bytes = new List<byte> { 0x93, (byte)'N', (byte)'U', (byte)'M', (byte)'P', (byte)'Y', 0x01, 0x00 };
        int headerLength = 128 - 10;
        bytes.Add((byte)(headerLength & 0xFF));
        bytes.Add((byte)(headerLength >> 8));
        bytes.AddRange(Encoding.ASCII.GetBytes(dict.PadRight(headerLength - 1) + "\n"));
        Assert.Equal(128, bytes.Count);

        // Six little-endian IEEE-754 binary32 values: 1.0 = 0x3F800000, -2.0 = 0xC0000000, 0.5 = 0x3F000000.
        bytes.AddRange([0x00, 0x00, 0x80, 0x3F, 0x00, 0x00, 0x00, 0xC0, 0x00, 0x00, 0x00, 0x3F]);
        bytes.AddRange([0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0x80, 0xBF, 0x00, 0x00, 0x20, 0x41]); // 0, -1, 10

        using var reader = new NpyReader(new MemoryStream(bytes.ToArray()));
        Assert.Equal(1, reader.FormatVersion);
        Assert.Equal("<f4", reader.DataType);
        Assert.Equal([2L, 3L], reader.Shape);
        VectorSet set = reader.ReadToEnd();
        Assert.Equal(2, set.Count);
        Assert.Equal(3, set.Dimension);
        Assert.Equal([1f, -2f, 0.5f, 0f, -1f, 10f], set.Data);
    }

    [Fact]
    public void Float64_is_converted_to_float32()
    {
        // 1.0 = 0x3FF0000000000000, -0.25 = 0xBFD0000000000000 (binary64, little-endian).
        byte[] data = [0, 0, 0, 0, 0, 0, 0xF0, 0x3F, 0, 0, 0, 0, 0, 0, 0xD0, 0xBF];
        VectorSet set = NpyFile.ReadVectors(new MemoryStream(Npy("<f8", "(1, 2)", data)));
        Assert.Equal([1f, -0.25f], set.Data);
    }

    [Fact]
    public void Uint8_reads_with_either_byte_order_mark()
    {
        byte[] data = [0, 1, 128, 255];
        Assert.Equal([0f, 1f, 128f, 255f], NpyFile.ReadVectors(new MemoryStream(Npy("|u1", "(2, 2)", data))).Data);
        Assert.Equal([0f, 1f, 128f, 255f], NpyFile.ReadVectors(new MemoryStream(Npy("<u1", "(2, 2)", data))).Data);
    }

    [Fact]
    public void Int32_reads_as_integers_and_as_floats()
    {
        byte[] data = [0xFE, 0xFF, 0xFF, 0xFF, 0x07, 0, 0, 0, 0, 0, 0, 0x01]; // -2, 7, 2^24
        IntVectorSet ids = NpyFile.ReadIntegers(new MemoryStream(Npy("<i4", "(3,)", data)));
        Assert.Equal([-2, 7, 1 << 24], ids.Data);
        Assert.Equal(3, ids.Count); // a 1-D array is n rows of dimension 1
        Assert.Equal(1, ids.Dimension);
        Assert.Equal([-2f, 7f, 16777216f], NpyFile.ReadVectors(new MemoryStream(Npy("<i4", "(3,)", data))).Data);
    }

    [Fact]
    public void Big_endian_float32_is_converted()
    {
        byte[] data = [0x3F, 0x80, 0x00, 0x00, 0xC0, 0x00, 0x00, 0x00]; // 1.0, -2.0 big-endian
        Assert.Equal([1f, -2f], NpyFile.ReadVectors(new MemoryStream(Npy(">f4", "(1, 2)", data))).Data);
    }

    [Fact]
    public void Int64_ids_read_as_int32()
    {
        byte[] data = new byte[16];
        BinaryPrimitives.WriteInt64LittleEndian(data, 5);
        BinaryPrimitives.WriteInt64LittleEndian(data.AsSpan(8), -9);
        Assert.Equal([5, -9], NpyFile.ReadIntegers(new MemoryStream(Npy("<i8", "(1, 2)", data))).Data);
    }

    [Theory]
    [InlineData(2)]
    [InlineData(3)]
    public void Versions_2_and_3_use_a_four_byte_header_length(int version)
    {
        byte[] data = [0x00, 0x00, 0x80, 0x3F];
        using var reader = new NpyReader(new MemoryStream(Npy("<f4", "(1, 1)", data, version: version)));
        Assert.Equal(version, reader.FormatVersion);
        Assert.Equal([1f], reader.ReadToEnd().Data);
    }

    [Fact]
    public void Older_16_byte_alignment_and_double_quotes_and_key_order_are_accepted()
    {
        string dict = "{\"shape\": (1, 2), \"fortran_order\": False, \"descr\": \"<f4\"}";
        byte[] data = [0x00, 0x00, 0x80, 0x3F, 0x00, 0x00, 0x00, 0x40];
        Assert.Equal([1f, 2f], NpyFile.ReadVectors(new MemoryStream(NpyRaw(dict, data, alignment: 16))).Data);
    }

    [Fact]
    public void Writer_output_follows_the_published_layout()
    {
        var stream = new MemoryStream();
        NpyFile.Write(stream, [1f, 2f, 3f, 4f, 5f, 6f], 3);
        byte[] bytes = stream.ToArray();

        Assert.Equal(new byte[] { 0x93, 0x4E, 0x55, 0x4D, 0x50, 0x59 }, bytes[..6]); // 0x93 "NUMPY"
        Assert.Equal(1, bytes[6]);
        Assert.Equal(0, bytes[7]);
        int headerLength = bytes[8] | (bytes[9] << 8);
        Assert.Equal(0, (10 + headerLength) % 64);
        string header = Encoding.ASCII.GetString(bytes, 10, headerLength);
        Assert.EndsWith("\n", header, StringComparison.Ordinal);
        Assert.Contains("'descr': '<f4'", header, StringComparison.Ordinal);
        Assert.Contains("'fortran_order': False", header, StringComparison.Ordinal);
        Assert.Contains("'shape': (2, 3)", header, StringComparison.Ordinal);
        Assert.Equal(10 + headerLength + (6 * 4), bytes.Length);
        Assert.Equal(1f, BinaryPrimitives.ReadSingleLittleEndian(bytes.AsSpan(10 + headerLength)));
    }

    [Property(MaxTest = 60)]
    public void Float32_round_trips_bit_for_bit(PositiveInt dimensionSeed, float[] values, bool seekable)
    {
        int dimension = 1 + (dimensionSeed.Get % 17);
        float[] data = (values ?? [])[..((values?.Length ?? 0) / dimension * dimension)];
        var stream = new MemoryStream();
        NpyFile.Write(stream, data, dimension);

        VectorSet back = NpyFile.ReadVectors(VecsFileTests.Source(stream, seekable));

        Assert.Equal(data.Length / dimension, back.Count);
        Assert.Equal(dimension, back.Dimension);
        Assert.Equal(data.Select(BitConverter.SingleToInt32Bits), back.Data.Select(BitConverter.SingleToInt32Bits));
    }

    [Property(MaxTest = 60)]
    public void Int32_round_trips(PositiveInt dimensionSeed, int[] values, bool seekable)
    {
        int dimension = 1 + (dimensionSeed.Get % 17);
        int[] data = (values ?? [])[..((values?.Length ?? 0) / dimension * dimension)];
        var stream = new MemoryStream();
        NpyFile.Write(stream, new IntVectorSet(data, dimension));

        IntVectorSet back = NpyFile.ReadIntegers(VecsFileTests.Source(stream, seekable));

        Assert.Equal(data, back.Data);
        Assert.Equal(dimension, back.Dimension);
    }

    [Fact]
    public void Streaming_reads_blocks_across_chunk_boundaries()
    {
        const int Dimension = 300; // 1200-byte rows: several 64 KiB chunks per block
        float[] data = Enumerable.Range(0, 500 * Dimension).Select(i => (float)Math.Sin(i)).ToArray();
        var stream = new MemoryStream();
        NpyFile.Write(stream, data, Dimension);
        stream.Position = 0;

        using var reader = new NpyReader(stream);
        var block = new float[77 * Dimension];
        var all = new List<float>();
        int rows;
        while ((rows = reader.ReadBlock(block)) > 0)
        {
            all.AddRange(block.AsSpan(0, rows * Dimension).ToArray());
        }

        Assert.Equal(data, all);
    }

    [Fact]
    public void Path_overloads_round_trip()
    {
        string path = Path.Combine(Path.GetTempPath(), $"vk-io-{Guid.NewGuid():N}.npy");
        try
        {
            NpyFile.Write(path, new IntVectorSet([1, 2, 3, 4], 2));
            Assert.Equal([1, 2, 3, 4], NpyFile.ReadIntegers(path).Data);
            NpyFile.Write(path, new VectorSet([1f, 2f, 3f, 4f], 4));
            Assert.Equal([1f, 2f, 3f, 4f], NpyFile.ReadVectors(path).Data);
        }
        finally
        {
            File.Delete(path);
        }
    }

    /// <summary>Assembles a .npy file from its parts, as the published description lays them out.</summary>
    internal static byte[] Npy(string descr, string shape, byte[] data, bool fortranOrder = false, int version = 1)
        => NpyRaw($"{{'descr': '{descr}', 'fortran_order': {(fortranOrder ? "True" : "False")}, 'shape': {shape}, }}", data, version: version);

    internal static byte[] NpyRaw(string dict, byte[] data, int version = 1, int alignment = 64)
    {
        int preamble = version == 1 ? 10 : 12;
        int unpadded = preamble + dict.Length + 1;
        int total = (unpadded + alignment - 1) / alignment * alignment;
        string header = dict.PadRight(total - preamble - 1) + "\n";
        var bytes = new List<byte> { 0x93, (byte)'N', (byte)'U', (byte)'M', (byte)'P', (byte)'Y', (byte)version, 0x00 };
        if (version == 1)
        {
            bytes.AddRange([(byte)(header.Length & 0xFF), (byte)(header.Length >> 8)]);
        }
        else
        {
            bytes.AddRange([(byte)(header.Length & 0xFF), (byte)(header.Length >> 8), (byte)(header.Length >> 16), (byte)(header.Length >> 24)]);
        }

        bytes.AddRange(Encoding.ASCII.GetBytes(header));
        bytes.AddRange(data);
        return bytes.ToArray();
    }
}
