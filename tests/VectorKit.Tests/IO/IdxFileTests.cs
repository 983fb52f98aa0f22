using System.IO.Compression;
using VectorKit.IO;
using Xunit;

namespace VectorKit.Tests.IO;

/// <summary>
/// idx files built by hand per the MNIST idx format as published by LeCun et al.: two zero bytes, a type code
/// (0x08 unsigned byte, 0x09 signed byte, 0x0B short, 0x0C int, 0x0D float, 0x0E double), the number of
/// dimensions, then each size as a big-endian int32, then the data big-endian.
/// </summary>
public sealed class IdxFileTests
{
    // Two 2×3 "images" of unsigned bytes.
    internal static readonly byte[] Images =
    [
        0x00, 0x00, 0x08, 0x03,
        0x00, 0x00, 0x00, 0x02,
        0x00, 0x00, 0x00, 0x02,
        0x00, 0x00, 0x00, 0x03,
        0, 1, 2, 3, 4, 255,
        9, 8, 7, 6, 5, 128,
    ];

    [Theory]
    [InlineData(false)]
    [InlineData(true)]
    public void Hand_built_idx3_reads_as_flattened_images_without_scaling(bool gzip)
    {
        using var reader = new IdxReader(new MemoryStream(gzip ? Gzip(Images) : Images));
        Assert.Equal(gzip, reader.IsCompressed);
        Assert.Equal(IdxDataType.UInt8, reader.DataType);
        Assert.Equal([2, 2, 3], reader.Shape);
        VectorSet set = reader.ReadToEnd();

        Assert.Equal(2, set.Count);
        Assert.Equal(6, set.Dimension);
        Assert.Equal([0f, 1f, 2f, 3f, 4f, 255f], set.Row(0).ToArray());
        Assert.Equal([9f, 8f, 7f, 6f, 5f, 128f], set.Row(1).ToArray());
    }

    [Theory]
    [InlineData(false)]
    [InlineData(true)]
    public void Hand_built_idx1_labels_read_as_integers(bool gzip)
    {
        byte[] labels = [0x00, 0x00, 0x08, 0x01, 0x00, 0x00, 0x00, 0x04, 3, 0, 9, 1];
        Assert.Equal([3, 0, 9, 1], IdxFile.ReadLabels(new MemoryStream(gzip ? Gzip(labels) : labels)));
        Assert.Equal([3, 0, 9, 1], IdxFile.ReadLabels(new TrickleStream(gzip ? Gzip(labels) : labels, 3)));
    }

    [Fact]
    public void Wider_types_are_big_endian()
    {
        // 0x0B short: 0x0102 = 258, 0xFFFE = -2.
        byte[] shorts = [0x00, 0x00, 0x0B, 0x01, 0x00, 0x00, 0x00, 0x02, 0x01, 0x02, 0xFF, 0xFE];
        Assert.Equal([258, -2], IdxFile.ReadLabels(new MemoryStream(shorts)));

        // 0x0C int: 0x00010000 = 65536.
        byte[] ints = [0x00, 0x00, 0x0C, 0x01, 0x00, 0x00, 0x00, 0x01, 0x00, 0x01, 0x00, 0x00];
        Assert.Equal([65536], IdxFile.ReadLabels(new MemoryStream(ints)));

        // 0x0D float, rank 2 (1×2): 1.0 = 3F800000, -2.0 = C0000000.
        byte[] floats = [0x00, 0x00, 0x0D, 0x02, 0, 0, 0, 1, 0, 0, 0, 2, 0x3F, 0x80, 0, 0, 0xC0, 0, 0, 0];
        Assert.Equal([1f, -2f], IdxFile.ReadVectors(new MemoryStream(floats)).Data);

        // 0x0E double: 0.5 = 3FE0000000000000.
        byte[] doubles = [0x00, 0x00, 0x0E, 0x01, 0, 0, 0, 1, 0x3F, 0xE0, 0, 0, 0, 0, 0, 0];
        Assert.Equal([0.5f], IdxFile.ReadVectors(new MemoryStream(doubles)).Data);

        // 0x09 signed byte: 0xFF = -1.
        byte[] sbytes = [0x00, 0x00, 0x09, 0x01, 0, 0, 0, 2, 0xFF, 0x7F];
        Assert.Equal([-1, 127], IdxFile.ReadLabels(new MemoryStream(sbytes)));
    }

    [Fact]
    public void Float_labels_and_higher_rank_labels_are_rejected()
    {
        DataFormatException e = Assert.Throws<DataFormatException>(() => IdxFile.ReadLabels(new MemoryStream(Images)));
        Assert.Contains("label file must be rank 1", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Gzip_streams_read_in_blocks()
    {
        using var reader = new IdxReader(new TrickleStream(Gzip(Images), 4));
        var block = new float[6];
        Assert.Equal(1, reader.ReadBlock(block));
        Assert.Equal(255f, block[5]);
        Assert.Equal(1, reader.ReadBlock(block));
        Assert.Equal(128f, block[5]);
        Assert.Equal(0, reader.ReadBlock(block));
    }

    internal static byte[] Gzip(byte[] data)
    {
        var output = new MemoryStream();
        using (var gzip = new GZipStream(output, CompressionLevel.Fastest, leaveOpen: true))
        {
            gzip.Write(data);
        }

        return output.ToArray();
    }
}
