using System.Buffers.Binary;

namespace VectorKit.IO;

/// <summary>
/// Streams the rows of a .fvecs, .ivecs or .bvecs file. Each row is a little-endian int32 dimension d followed by
/// d elements (float32, int32 or uint8, little-endian); every row must have the dimension of the first.
/// </summary>
/// <remarks>
/// The format has no header, so the dimension comes from the first row. When the stream's length is known and is a
/// whole number of rows, <see cref="VectorReader.Count"/> is known from the start; otherwise it is -1 until the
/// end is reached. An empty file reads as no rows of dimension 0.
/// </remarks>
public sealed class VecsReader : VectorReader
{
    /// <summary>Starts reading a vecs stream and reads the first row's dimension.</summary>
    /// <param name="stream">The stream, positioned at the first row.</param>
    /// <param name="elementType">The element type (.fvecs, .ivecs or .bvecs).</param>
    /// <param name="leaveOpen">Whether to leave <paramref name="stream"/> open when the reader is disposed.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <exception cref="ArgumentNullException"><paramref name="stream"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentException"><paramref name="stream"/> cannot be read.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="elementType"/> is not a defined value.</exception>
    /// <exception cref="DataFormatException">The first dimension is out of range or the data is truncated.</exception>
    public VecsReader(Stream stream, VecsElementType elementType, bool leaveOpen = false, DataReadLimits? limits = null)
        : base(stream, leaveOpen, FormatNameOf(elementType), limits)
    {
        ElementType = elementType;
        ElementKind kind = elementType switch
        {
            VecsElementType.Float32 => ElementKind.Float32,
            VecsElementType.Int32 => ElementKind.Int32,
            _ => ElementKind.UInt8,
        };

        Span<byte> prefix = stackalloc byte[4];
        int got = ReadUpTo(prefix);
        if (got == 0)
        {
            SetEmpty();
            return;
        }

        if (got < 4)
        {
            DataFormatThrow.Truncated(FormatName, "the dimension of row 0", 0, 4, got);
        }

        int dimension = BinaryPrimitives.ReadInt32LittleEndian(prefix);
        long count = -1;
        long remaining = RemainingBytes;
        if (remaining >= 0 && dimension >= 1 && dimension <= Limits.MaxDimension)
        {
            long rowBytes = 4 + ((long)dimension * ElementConverter.SizeOf(kind));
            long all = remaining + 4;

            // Less than one row: truncated, said before a row's buffer (up to MaxDimension elements) is allocated.
            if (all < rowBytes)
            {
                DataFormatThrow.Truncated(FormatName, "the values of row 0", 4, rowBytes - 4, remaining);
            }

            // A length that is not a whole number of rows leaves the count unknown; reading then reports
            // exactly which row is ragged or truncated.
            if (all % rowBytes == 0)
            {
                count = all / rowBytes;
            }
        }

        SetLayout(count, dimension, kind, bigEndian: false, rowPrefixConsumed: true);
    }

    /// <summary>The element type of the file.</summary>
    public VecsElementType ElementType { get; }

    /// <summary>Opens a vecs file for streaming.</summary>
    /// <param name="path">The file path.</param>
    /// <param name="elementType">The element type (.fvecs, .ivecs or .bvecs).</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <returns>A reader that owns the file handle; its <see cref="DataFormatException"/>s, here and in later reads, name the file (<see cref="DataFormatException.FilePath"/>).</returns>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is <see langword="null"/>.</exception>
    /// <exception cref="IOException">The file cannot be opened.</exception>
    /// <exception cref="DataFormatException">The first dimension is out of range or the data is truncated.</exception>
    public static VecsReader Open(string path, VecsElementType elementType, DataReadLimits? limits = null)
    {
        FileStream stream = DataFiles.OpenRead(path);
        try
        {
            return new VecsReader(stream, elementType, leaveOpen: false, limits) { SourcePath = stream.Name };
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

    private static string FormatNameOf(VecsElementType elementType) => elementType switch
    {
        VecsElementType.Float32 => "fvecs",
        VecsElementType.Int32 => "ivecs",
        VecsElementType.UInt8 => "bvecs",
        _ => throw new ArgumentOutOfRangeException(nameof(elementType), elementType, "Unknown vecs element type."),
    };
}
