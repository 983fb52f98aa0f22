using System.Buffers.Binary;
using System.IO.Compression;

namespace VectorKit.IO;

/// <summary>
/// Streams the rows of a file in the MNIST idx format, plain or gzip-compressed (detected by the gzip magic 1F 8B).
/// </summary>
/// <remarks>
/// <para>
/// Layout: two zero bytes, a type code (<see cref="IdxDataType"/>), the rank r, then r big-endian int32 sizes, then
/// the elements, big-endian, last index fastest. The first size is the row count; the remaining sizes multiply to
/// the dimension, so an idx3 image file of n × rows × cols reads as n vectors of rows × cols components, and an
/// idx1 label file reads as n rows of dimension 1.
/// </para>
/// <para>
/// Values are converted without scaling: image bytes 0..255 become the floats 0..255. For gzip input the length
/// is unknown, so the sizes are checked against <see cref="DataReadLimits"/> and memory grows with the data
/// actually decompressed; byte offsets in messages then refer to the decompressed data.
/// </para>
/// </remarks>
public sealed class IdxReader : VectorReader
{
    private const string Format = "idx";
    private const int MaxRank = 16;

    private readonly int[] _shape;

    /// <summary>Starts reading an idx stream (plain or gzip) and parses its header.</summary>
    /// <param name="stream">The stream, positioned at the first byte of the file.</param>
    /// <param name="leaveOpen">Whether to leave <paramref name="stream"/> open when the reader is disposed.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <exception cref="ArgumentNullException"><paramref name="stream"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentException"><paramref name="stream"/> cannot be read.</exception>
    /// <exception cref="DataFormatException">
    /// The magic, type code, rank or sizes are invalid, a size exceeds a limit, the compressed data is corrupt, or
    /// the data is shorter than the sizes require.
    /// </exception>
    public IdxReader(Stream stream, bool leaveOpen = false, DataReadLimits? limits = null)
        : base(stream, leaveOpen, Format, limits)
    {
        byte[] magic = new byte[4];
        ReadHeader(magic.AsSpan(0, 2), "the magic number");
        if (magic[0] == 0x1F && magic[1] == 0x8B)
        {
            IsCompressed = true;
            var prefixed = new PrefixedStream(magic[..2], CurrentStream);
            ReadThrough(new GZipStream(prefixed, CompressionMode.Decompress, leaveOpen: false));
            ReadHeader(magic, "the magic number");
        }
        else
        {
            ReadHeader(magic.AsSpan(2), "the magic number");
        }

        if (magic[0] != 0 || magic[1] != 0)
        {
            DataFormatThrow.Malformed(Format, $"wrong magic {Convert.ToHexString(magic)}; an idx file starts with two zero bytes (or is gzip, 1F8B)", 0);
        }

        var type = (IdxDataType)magic[2];
        (ElementKind kind, bool known) = type switch
        {
            IdxDataType.UInt8 => (ElementKind.UInt8, true),
            IdxDataType.Int8 => (ElementKind.Int8, true),
            IdxDataType.Int16 => (ElementKind.Int16, true),
            IdxDataType.Int32 => (ElementKind.Int32, true),
            IdxDataType.Float32 => (ElementKind.Float32, true),
            IdxDataType.Float64 => (ElementKind.Float64, true),
            _ => (default, false),
        };
        if (!known)
        {
            DataFormatThrow.Malformed(Format, $"unknown type code 0x{magic[2]:X2}; expected 0x08, 0x09, 0x0B, 0x0C, 0x0D or 0x0E", 2);
        }

        int rank = magic[3];
        if (rank is < 1 or > MaxRank)
        {
            DataFormatThrow.Malformed(Format, $"rank {rank} is not supported; expected 1..{MaxRank}", 3);
        }

        Span<byte> sizes = stackalloc byte[4 * MaxRank];
        sizes = sizes[..(4 * rank)];
        ReadHeader(sizes, "the dimension sizes");
        _shape = new int[rank];
        long dimension = 1;
        for (int i = 0; i < rank; i++)
        {
            int size = BinaryPrimitives.ReadInt32BigEndian(sizes[(4 * i)..]);
            if (size < 0)
            {
                DataFormatThrow.Malformed(Format, $"size {i} is negative ({size})", 4 + (4 * i));
            }

            _shape[i] = size;
            if (i > 0)
            {
                // Saturate instead of overflowing; anything above the cap is rejected by SetLayout.
                dimension = dimension > Limits.MaxDimension ? dimension : checked(dimension * size);
            }
        }

        DataType = type;
        SetLayout(_shape[0], dimension, kind, bigEndian: true, rowPrefixConsumed: false);
    }

    /// <summary>The sizes from the header; the first is the row count.</summary>
    public IReadOnlyList<int> Shape => _shape;

    /// <summary>The element type from the header.</summary>
    public IdxDataType DataType { get; }

    /// <summary>Whether the input was gzip-compressed.</summary>
    public bool IsCompressed { get; }

    /// <summary>Opens an idx file (plain or gzip) for streaming.</summary>
    /// <param name="path">The file path.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <returns>A reader that owns the file handle; its <see cref="DataFormatException"/>s, here and in later reads, name the file (<see cref="DataFormatException.FilePath"/>).</returns>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is <see langword="null"/>.</exception>
    /// <exception cref="IOException">The file cannot be opened.</exception>
    /// <exception cref="DataFormatException">The header is malformed or exceeds a limit, or the data is too short.</exception>
    public static IdxReader Open(string path, DataReadLimits? limits = null)
    {
        FileStream stream = DataFiles.OpenRead(path);
        try
        {
            return new IdxReader(stream, leaveOpen: false, limits) { SourcePath = stream.Name };
        }
        catch (DataFormatException e) when (DataFiles.NameFile(e, stream.Name))
        {
            throw; // not reached: the filter names the file and lets the exception pass
        }
        catch
        {
            stream.Dispose();
            throw;
        }
    }
}
