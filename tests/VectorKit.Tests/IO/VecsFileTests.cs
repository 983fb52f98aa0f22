using FsCheck;
using FsCheck.Xunit;
using VectorKit.IO;
using Xunit;

namespace VectorKit.Tests.IO;

public sealed class VecsFileTests
{
    // The vecs layout, from memory of its common description: per row, an int32 little-endian dimension d,
    // then d little-endian float32 (.fvecs), int32 (.ivecs) or uint8 (.bvecs) values.
    private static readonly byte[] TwoFvecsRows =
    [
        0x02, 0x00, 0x00, 0x00, 0x00, 0x00, 0x80, 0x3F, 0x00, 0x00, 0x00, 0xC0, // d=2: 1.0f, -2.0f
        0x02, 0x00, 0x00, 0x00, 0x00, 0x00, 0xC0, 0x3F, 0x00, 0x00, 0x00, 0x00, // d=2: 1.5f, 0.0f
    ];

    [Fact]
    public void Fvecs_built_by_hand_reads_as_little_endian_rows()
    {
        VectorSet set = VecsFile.ReadFvecs(new MemoryStream(TwoFvecsRows));

        Assert.Equal(2, set.Count);
        Assert.Equal(2, set.Dimension);
        Assert.Equal([1.0f, -2.0f, 1.5f, 0.0f], set.Data);
        Assert.Equal([1.5f, 0.0f], set.Row(1).ToArray());
    }

    [Fact]
    public void Fvecs_written_matches_the_hand_built_bytes()
    {
        var stream = new MemoryStream();
        VecsFile.WriteFvecs(stream, [1.0f, -2.0f, 1.5f, 0.0f], 2);
        Assert.Equal(TwoFvecsRows, stream.ToArray());
    }

    [Fact]
    public void Ivecs_and_bvecs_built_by_hand_read_correctly()
    {
        byte[] ivecs = [0x01, 0, 0, 0, 0xFE, 0xFF, 0xFF, 0xFF, 0x01, 0, 0, 0, 0x07, 0, 0, 0]; // d=1: -2 ; d=1: 7
        IntVectorSet ids = VecsFile.ReadIvecs(new MemoryStream(ivecs));
        Assert.Equal([-2, 7], ids.Data);
        Assert.Equal(1, ids.Dimension);

        byte[] bvecs = [0x03, 0, 0, 0, 0, 128, 255]; // d=3: 0, 128, 255
        VectorSet bytes = VecsFile.ReadBvecs(new MemoryStream(bvecs));
        Assert.Equal([0f, 128f, 255f], bytes.Data);
    }

    [Fact]
    public void Empty_file_reads_as_no_rows()
    {
        VectorSet set = VecsFile.ReadFvecs(new MemoryStream());
        Assert.Equal(0, set.Count);
        Assert.Equal(0, set.Dimension);
    }

    [Property(MaxTest = 60)]
    public void Fvecs_round_trips_bit_for_bit(PositiveInt dimensionSeed, float[] values, bool seekable)
    {
        int dimension = 1 + (dimensionSeed.Get % 17);
        float[] data = Truncate(values ?? [], dimension);
        var stream = new MemoryStream();
        VecsFile.WriteFvecs(stream, data, dimension);

        VectorSet back = VecsFile.ReadFvecs(Source(stream, seekable));

        Assert.Equal(data.Length / dimension, back.Count);
        if (back.Count > 0)
        {
            Assert.Equal(dimension, back.Dimension);
        }

        Assert.Equal(Bits(data), Bits(back.Data));
    }

    [Property(MaxTest = 60)]
    public void Ivecs_round_trips(PositiveInt dimensionSeed, int[] values, bool seekable)
    {
        int dimension = 1 + (dimensionSeed.Get % 17);
        int[] data = Truncate(values ?? [], dimension);
        var stream = new MemoryStream();
        VecsFile.WriteIvecs(stream, data, dimension);

        IntVectorSet back = VecsFile.ReadIvecs(Source(stream, seekable));

        Assert.Equal(data, back.Data);
        Assert.Equal(data.Length / dimension, back.Count);
    }

    [Property(MaxTest = 60)]
    public void Bvecs_round_trips_to_floats_of_the_same_value(PositiveInt dimensionSeed, byte[] values, bool seekable)
    {
        int dimension = 1 + (dimensionSeed.Get % 17);
        byte[] data = Truncate(values ?? [], dimension);
        var stream = new MemoryStream();
        VecsFile.WriteBvecs(stream, data, dimension);

        VectorSet back = VecsFile.ReadBvecs(Source(stream, seekable));

        Assert.Equal(data.Select(b => (float)b).ToArray(), back.Data);
    }

    [Theory]
    [InlineData(true, 1)]
    [InlineData(true, 7)]
    [InlineData(false, 7)]
    [InlineData(false, 1000)]
    public void Streaming_in_blocks_yields_the_same_rows_as_reading_whole(bool seekable, int rowsPerBlock)
    {
        const int Dimension = 5;
        float[] data = Enumerable.Range(0, 103 * Dimension).Select(i => i * 0.25f).ToArray();
        var stream = new MemoryStream();
        VecsFile.WriteFvecs(stream, data, Dimension);

        using var reader = new VecsReader(Source(stream, seekable), VecsElementType.Float32);
        Assert.Equal(seekable ? 103 : -1, reader.Count);
        float[] collected = reader.ReadBlocks(rowsPerBlock).SelectMany(b => b.Data).ToArray();

        Assert.Equal(data, collected);
        Assert.Equal(103, reader.Count);
        Assert.Equal(103, reader.RowsRead);
    }

    [Fact]
    public void ReadBlock_fills_the_destination_with_whole_rows_only()
    {
        var stream = new MemoryStream();
        VecsFile.WriteFvecs(stream, [1, 2, 3, 4, 5, 6], 2);
        stream.Position = 0;
        using var reader = new VecsReader(stream, VecsElementType.Float32);

        var destination = new float[5]; // room for two rows and a half
        Assert.Equal(2, reader.ReadBlock(destination));
        Assert.Equal([1f, 2f, 3f, 4f], destination[..4]);
        Assert.Equal(1, reader.ReadBlock(destination));
        Assert.Equal(0, reader.ReadBlock(destination));
    }

    [Fact]
    public void Cancelled_token_stops_reading()
    {
        var stream = new MemoryStream();
        VecsFile.WriteFvecs(stream, new float[40], 4);
        stream.Position = 0;
        using var reader = new VecsReader(stream, VecsElementType.Float32);

        Assert.Throws<OperationCanceledException>(() => reader.ReadToEnd(new CancellationToken(canceled: true)));
    }

    [Fact]
    public void Float_file_cannot_be_read_as_integers()
    {
        using var reader = new VecsReader(new MemoryStream(TwoFvecsRows), VecsElementType.Float32);
        Assert.False(reader.IsIntegerData);
        InvalidOperationException e = Assert.Throws<InvalidOperationException>(() => reader.ReadToEndAsIntegers());
        Assert.Contains("cannot be read as integers", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Writers_and_readers_validate_arguments()
    {
        Assert.Throws<ArgumentNullException>(() => VecsFile.ReadFvecs((Stream)null!));
        Assert.Throws<ArgumentNullException>(() => VecsFile.ReadFvecs((string)null!));
        Assert.Throws<ArgumentNullException>(() => VecsFile.WriteFvecs(null!, [1f], 1));
        Assert.Throws<ArgumentNullException>(() => VecsFile.WriteFvecs(new MemoryStream(), (VectorSet)null!));
        Assert.Throws<ArgumentOutOfRangeException>(() => VecsFile.WriteFvecs(new MemoryStream(), [1f], 0));
        ArgumentException e = Assert.Throws<ArgumentException>(() => VecsFile.WriteFvecs(new MemoryStream(), [1f, 2f, 3f], 2));
        Assert.Contains("not a whole number of rows of dimension 2", e.Message, StringComparison.Ordinal);
        Assert.Throws<ArgumentException>(() => VecsFile.WriteIvecs(new MemoryStream(), [1, 2, 3], 2));
        Assert.Throws<ArgumentException>(() => VecsFile.WriteBvecs(new MemoryStream(), [1, 2, 3], 2));
        Assert.Throws<ArgumentException>(() => new VecsReader(new WriteOnlyStream(), VecsElementType.Float32));
    }

    [Fact]
    public void Path_overloads_round_trip()
    {
        string path = Path.Combine(Path.GetTempPath(), $"vk-io-{Guid.NewGuid():N}.fvecs");
        try
        {
            var set = new VectorSet([1f, 2f, 3f, 4f, 5f, 6f], 3);
            VecsFile.WriteFvecs(path, set);
            Assert.Equal(set.Data, VecsFile.ReadFvecs(path).Data);
        }
        finally
        {
            File.Delete(path);
        }
    }

    internal static Stream Source(MemoryStream written, bool seekable)
        => seekable ? new MemoryStream(written.ToArray()) : new TrickleStream(written.ToArray(), 7);

    private static T[] Truncate<T>(T[] values, int dimension) => values[..(values.Length - (values.Length % dimension))];

    private static int[] Bits(float[] values) => values.Select(BitConverter.SingleToInt32Bits).ToArray();

    private sealed class WriteOnlyStream : MemoryStream
    {
        public override bool CanRead => false;
    }
}
