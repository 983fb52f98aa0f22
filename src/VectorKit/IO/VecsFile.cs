namespace VectorKit.IO;

/// <summary>
/// Reads and writes whole .fvecs, .ivecs and .bvecs files. Each row is a little-endian int32 dimension d followed
/// by d elements: float32 (.fvecs), int32 (.ivecs) or uint8 (.bvecs). All rows share one dimension.
/// </summary>
/// <remarks>
/// Methods taking a <see cref="Stream"/> leave it open. For files larger than memory use <see cref="VecsReader"/>.
/// An empty file reads as a set with no rows and dimension 0; writing such a set writes nothing.
/// </remarks>
public static partial class VecsFile
{
    /// <summary>Reads all vectors of a .fvecs stream.</summary>
    /// <param name="stream">The stream, positioned at the first row.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <returns>The vectors.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="stream"/> is <see langword="null"/>.</exception>
    /// <exception cref="DataFormatException">The file is truncated, has rows of different dimensions, or exceeds a limit.</exception>
    /// <exception cref="InvalidOperationException">The data does not fit in one array.</exception>
    public static VectorSet ReadFvecs(Stream stream, DataReadLimits? limits = null)
        => ReadFloats(stream, VecsElementType.Float32, limits);

    /// <summary>Reads all vectors of a .fvecs file.</summary>
    /// <param name="path">The file path.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <returns>The vectors.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is <see langword="null"/>.</exception>
    /// <exception cref="IOException">The file cannot be opened.</exception>
    /// <exception cref="DataFormatException">The file is truncated, has rows of different dimensions, or exceeds a limit.</exception>
    /// <exception cref="InvalidOperationException">The data does not fit in one array.</exception>
    public static VectorSet ReadFvecs(string path, DataReadLimits? limits = null)
    {
        using VecsReader reader = VecsReader.Open(path, VecsElementType.Float32, limits);
        return reader.ReadToEnd();
    }

    /// <summary>Reads all vectors of a .bvecs stream, converting each byte 0..255 to the float of the same value.</summary>
    /// <param name="stream">The stream, positioned at the first row.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <returns>The vectors.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="stream"/> is <see langword="null"/>.</exception>
    /// <exception cref="DataFormatException">The file is truncated, has rows of different dimensions, or exceeds a limit.</exception>
    /// <exception cref="InvalidOperationException">The data does not fit in one array.</exception>
    public static VectorSet ReadBvecs(Stream stream, DataReadLimits? limits = null)
        => ReadFloats(stream, VecsElementType.UInt8, limits);

    /// <summary>Reads all vectors of a .bvecs file, converting each byte 0..255 to the float of the same value.</summary>
    /// <param name="path">The file path.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <returns>The vectors.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is <see langword="null"/>.</exception>
    /// <exception cref="IOException">The file cannot be opened.</exception>
    /// <exception cref="DataFormatException">The file is truncated, has rows of different dimensions, or exceeds a limit.</exception>
    /// <exception cref="InvalidOperationException">The data does not fit in one array.</exception>
    public static VectorSet ReadBvecs(string path, DataReadLimits? limits = null)
    {
        using VecsReader reader = VecsReader.Open(path, VecsElementType.UInt8, limits);
        return reader.ReadToEnd();
    }

    /// <summary>Reads all rows of an .ivecs stream (typically ground-truth neighbour ids).</summary>
    /// <param name="stream">The stream, positioned at the first row.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <returns>The rows.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="stream"/> is <see langword="null"/>.</exception>
    /// <exception cref="DataFormatException">The file is truncated, has rows of different dimensions, or exceeds a limit.</exception>
    /// <exception cref="InvalidOperationException">The data does not fit in one array.</exception>
    public static IntVectorSet ReadIvecs(Stream stream, DataReadLimits? limits = null)
    {
        using var reader = new VecsReader(stream, VecsElementType.Int32, leaveOpen: true, limits);
        return reader.ReadToEndAsIntegers();
    }

    /// <summary>Reads all rows of an .ivecs file (typically ground-truth neighbour ids).</summary>
    /// <param name="path">The file path.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <returns>The rows.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is <see langword="null"/>.</exception>
    /// <exception cref="IOException">The file cannot be opened.</exception>
    /// <exception cref="DataFormatException">The file is truncated, has rows of different dimensions, or exceeds a limit.</exception>
    /// <exception cref="InvalidOperationException">The data does not fit in one array.</exception>
    public static IntVectorSet ReadIvecs(string path, DataReadLimits? limits = null)
    {
        using VecsReader reader = VecsReader.Open(path, VecsElementType.Int32, limits);
        return reader.ReadToEndAsIntegers();
    }

    /// <summary>Writes row-major float vectors as .fvecs.</summary>
    /// <param name="stream">The destination; left open.</param>
    /// <param name="data">The vectors, row after row.</param>
    /// <param name="dimension">The components per vector, at least 1.</param>
    /// <exception cref="ArgumentNullException"><paramref name="stream"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="dimension"/> is less than 1.</exception>
    /// <exception cref="ArgumentException">
    /// <paramref name="stream"/> cannot be written, or the length of <paramref name="data"/> is not a multiple of <paramref name="dimension"/>.
    /// </exception>
    public static void WriteFvecs(Stream stream, ReadOnlySpan<float> data, int dimension)
    {
        int rows = CheckWrite(stream, data.Length, dimension);
        for (int i = 0; i < rows; i++)
        {
            LittleEndianWriter.WriteInt32(stream, dimension);
            LittleEndianWriter.Write(stream, data.Slice(i * dimension, dimension));
        }
    }

    /// <summary>Writes a vector set as .fvecs.</summary>
    /// <param name="stream">The destination; left open.</param>
    /// <param name="vectors">The vectors.</param>
    /// <exception cref="ArgumentNullException"><paramref name="stream"/> or <paramref name="vectors"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentException"><paramref name="stream"/> cannot be written.</exception>
    public static void WriteFvecs(Stream stream, VectorSet vectors)
    {
        ArgumentNullException.ThrowIfNull(vectors);
        if (vectors.Count > 0)
        {
            WriteFvecs(stream, vectors.Data, vectors.Dimension);
        }
        else
        {
            DataFiles.CheckWritable(stream);
        }
    }

    /// <summary>Writes a vector set to a .fvecs file, creating or replacing it atomically.</summary>
    /// <param name="path">The file path.</param>
    /// <param name="vectors">The vectors.</param>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> or <paramref name="vectors"/> is <see langword="null"/>.</exception>
    /// <remarks>
    /// The data goes to a hidden temporary file beside <paramref name="path"/>, which is flushed to the disk and renamed
    /// over it: the file at <paramref name="path"/> is the previous one or the complete new one, never a part. On
    /// failure the temporary file is deleted and the previous file is left as it was.
    /// </remarks>
    /// <exception cref="ArgumentException"><paramref name="path"/> is empty or names a folder.</exception>
    /// <exception cref="IOException">Creating, writing (on a full disk, say) or renaming the temporary file failed; the message names <paramref name="path"/> and the step.</exception>
    public static void WriteFvecs(string path, VectorSet vectors)
    {
        ArgumentNullException.ThrowIfNull(vectors);
        DataFiles.Replace(path, stream => WriteFvecs(stream, vectors));
    }

    /// <summary>Writes row-major int32 rows as .ivecs.</summary>
    /// <param name="stream">The destination; left open.</param>
    /// <param name="data">The rows, one after another.</param>
    /// <param name="dimension">The values per row, at least 1.</param>
    /// <exception cref="ArgumentNullException"><paramref name="stream"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="dimension"/> is less than 1.</exception>
    /// <exception cref="ArgumentException">
    /// <paramref name="stream"/> cannot be written, or the length of <paramref name="data"/> is not a multiple of <paramref name="dimension"/>.
    /// </exception>
    public static void WriteIvecs(Stream stream, ReadOnlySpan<int> data, int dimension)
    {
        int rows = CheckWrite(stream, data.Length, dimension);
        for (int i = 0; i < rows; i++)
        {
            LittleEndianWriter.WriteInt32(stream, dimension);
            LittleEndianWriter.Write(stream, data.Slice(i * dimension, dimension));
        }
    }

    /// <summary>Writes an int32 set as .ivecs.</summary>
    /// <param name="stream">The destination; left open.</param>
    /// <param name="rows">The rows.</param>
    /// <exception cref="ArgumentNullException"><paramref name="stream"/> or <paramref name="rows"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentException"><paramref name="stream"/> cannot be written.</exception>
    public static void WriteIvecs(Stream stream, IntVectorSet rows)
    {
        ArgumentNullException.ThrowIfNull(rows);
        if (rows.Count > 0)
        {
            WriteIvecs(stream, rows.Data, rows.Dimension);
        }
        else
        {
            DataFiles.CheckWritable(stream);
        }
    }

    /// <summary>Writes an int32 set to an .ivecs file, creating or replacing it atomically.</summary>
    /// <param name="path">The file path.</param>
    /// <param name="rows">The rows.</param>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> or <paramref name="rows"/> is <see langword="null"/>.</exception>
    /// <remarks>
    /// The data goes to a hidden temporary file beside <paramref name="path"/>, which is flushed to the disk and renamed
    /// over it: the file at <paramref name="path"/> is the previous one or the complete new one, never a part. On
    /// failure the temporary file is deleted and the previous file is left as it was.
    /// </remarks>
    /// <exception cref="ArgumentException"><paramref name="path"/> is empty or names a folder.</exception>
    /// <exception cref="IOException">Creating, writing (on a full disk, say) or renaming the temporary file failed; the message names <paramref name="path"/> and the step.</exception>
    public static void WriteIvecs(string path, IntVectorSet rows)
    {
        ArgumentNullException.ThrowIfNull(rows);
        DataFiles.Replace(path, stream => WriteIvecs(stream, rows));
    }

    /// <summary>Writes row-major byte vectors as .bvecs.</summary>
    /// <param name="stream">The destination; left open.</param>
    /// <param name="data">The vectors, row after row.</param>
    /// <param name="dimension">The components per vector, at least 1.</param>
    /// <exception cref="ArgumentNullException"><paramref name="stream"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="dimension"/> is less than 1.</exception>
    /// <exception cref="ArgumentException">
    /// <paramref name="stream"/> cannot be written, or the length of <paramref name="data"/> is not a multiple of <paramref name="dimension"/>.
    /// </exception>
    public static void WriteBvecs(Stream stream, ReadOnlySpan<byte> data, int dimension)
    {
        int rows = CheckWrite(stream, data.Length, dimension);
        for (int i = 0; i < rows; i++)
        {
            LittleEndianWriter.WriteInt32(stream, dimension);
            stream.Write(data.Slice(i * dimension, dimension));
        }
    }

    private static VectorSet ReadFloats(Stream stream, VecsElementType type, DataReadLimits? limits)
    {
        using var reader = new VecsReader(stream, type, leaveOpen: true, limits);
        return reader.ReadToEnd();
    }

    private static int CheckWrite(Stream stream, int length, int dimension)
    {
        DataFiles.CheckWritable(stream);
        if (dimension < 1)
        {
            DataFormatThrow.ArgumentOutOfRange(nameof(dimension), dimension, "must be at least 1");
        }

        if (length % dimension != 0)
        {
            DataFormatThrow.NotMultipleOfDimension("data", length, dimension);
        }

        return length / dimension;
    }
}
