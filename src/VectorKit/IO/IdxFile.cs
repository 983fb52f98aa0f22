namespace VectorKit.IO;

/// <summary>Reads whole MNIST idx files, plain or gzip-compressed; see <see cref="IdxReader"/> for the layout.</summary>
/// <remarks>Methods taking a <see cref="Stream"/> leave it open. Values are not scaled: pixel bytes 0..255 read as 0..255.</remarks>
public static class IdxFile
{
    /// <summary>Reads all rows of an idx stream as float vectors, e.g. an idx3 image file as n vectors of rows × cols.</summary>
    /// <param name="stream">The stream, positioned at the first byte of the file.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <returns>The vectors.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="stream"/> is <see langword="null"/>.</exception>
    /// <exception cref="DataFormatException">The file is malformed, truncated or exceeds a limit.</exception>
    /// <exception cref="InvalidOperationException">The data does not fit in one array.</exception>
    public static VectorSet ReadVectors(Stream stream, DataReadLimits? limits = null)
    {
        using var reader = new IdxReader(stream, leaveOpen: true, limits);
        return reader.ReadToEnd();
    }

    /// <summary>Reads all rows of an idx file as float vectors, e.g. an idx3 image file as n vectors of rows × cols.</summary>
    /// <param name="path">The file path.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <returns>The vectors.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is <see langword="null"/>.</exception>
    /// <exception cref="IOException">The file cannot be opened.</exception>
    /// <exception cref="DataFormatException">The file is malformed, truncated or exceeds a limit.</exception>
    /// <exception cref="InvalidOperationException">The data does not fit in one array.</exception>
    public static VectorSet ReadVectors(string path, DataReadLimits? limits = null)
    {
        using IdxReader reader = IdxReader.Open(path, limits);
        return reader.ReadToEnd();
    }

    /// <summary>Reads a rank-1 integer idx stream (an idx1 label file) as one int32 per item.</summary>
    /// <param name="stream">The stream, positioned at the first byte of the file.</param>
    /// <param name="limits">Caps on the row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <returns>The labels.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="stream"/> is <see langword="null"/>.</exception>
    /// <exception cref="DataFormatException">
    /// The file is malformed, truncated or exceeds a limit, is not rank 1, or holds floating-point values.
    /// </exception>
    public static int[] ReadLabels(Stream stream, DataReadLimits? limits = null)
    {
        using var reader = new IdxReader(stream, leaveOpen: true, limits);
        return ReadLabels(reader);
    }

    /// <summary>Reads a rank-1 integer idx file (an idx1 label file) as one int32 per item.</summary>
    /// <param name="path">The file path.</param>
    /// <param name="limits">Caps on the row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <returns>The labels.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is <see langword="null"/>.</exception>
    /// <exception cref="IOException">The file cannot be opened.</exception>
    /// <exception cref="DataFormatException">
    /// The file is malformed, truncated or exceeds a limit, is not rank 1, or holds floating-point values.
    /// </exception>
    public static int[] ReadLabels(string path, DataReadLimits? limits = null)
    {
        using IdxReader reader = IdxReader.Open(path, limits);
        return DataFiles.Named(path, () => ReadLabels(reader));
    }

    private static int[] ReadLabels(IdxReader reader)
    {
        if (reader.Shape.Count != 1 || !reader.IsIntegerData)
        {
            DataFormatThrow.Malformed(
                "idx",
                $"a label file must be rank 1 with integer values; found rank {reader.Shape.Count} of {reader.DataType}");
        }

        return reader.ReadToEndAsIntegers().Data;
    }
}
