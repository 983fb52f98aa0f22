using System.Buffers.Binary;
using System.Globalization;
using System.Text;

namespace VectorKit.IO;

/// <summary>Reads and writes whole NumPy .npy files of vectors; see <see cref="NpyReader"/> for what is accepted.</summary>
/// <remarks>
/// Writing produces format version 1.0, little-endian <c>&lt;f4</c>, <c>&lt;i4</c> or <c>&lt;i8</c>, C order, shape (n, d), with the
/// header padded by spaces and a newline so the data starts at a multiple of 64 bytes. Methods taking a
/// <see cref="Stream"/> leave it open.
/// </remarks>
public static partial class NpyFile
{
    private const int DataAlignment = 64;

    /// <summary>Reads all rows of a .npy stream as float vectors (any supported dtype, converted).</summary>
    /// <param name="stream">The stream, positioned at the magic bytes.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <returns>The vectors.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="stream"/> is <see langword="null"/>.</exception>
    /// <exception cref="DataFormatException">The file is malformed, unsupported, truncated or exceeds a limit.</exception>
    /// <exception cref="InvalidOperationException">The data does not fit in one array.</exception>
    public static VectorSet ReadVectors(Stream stream, DataReadLimits? limits = null)
    {
        using var reader = new NpyReader(stream, leaveOpen: true, limits);
        return reader.ReadToEnd();
    }

    /// <summary>Reads all rows of a .npy file as float vectors (any supported dtype, converted).</summary>
    /// <param name="path">The file path.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <returns>The vectors.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is <see langword="null"/>.</exception>
    /// <exception cref="IOException">The file cannot be opened.</exception>
    /// <exception cref="DataFormatException">The file is malformed, unsupported, truncated or exceeds a limit.</exception>
    /// <exception cref="InvalidOperationException">The data does not fit in one array.</exception>
    public static VectorSet ReadVectors(string path, DataReadLimits? limits = null)
    {
        using NpyReader reader = NpyReader.Open(path, limits);
        return reader.ReadToEnd();
    }

    /// <summary>Reads all rows of an integer .npy stream (e.g. neighbour ids) as int32.</summary>
    /// <param name="stream">The stream, positioned at the magic bytes.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <returns>The rows.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="stream"/> is <see langword="null"/>.</exception>
    /// <exception cref="DataFormatException">
    /// The file is malformed, unsupported, truncated or exceeds a limit, or an int64 value does not fit in int32.
    /// </exception>
    /// <exception cref="InvalidOperationException">The dtype is floating-point, or the data does not fit in one array.</exception>
    public static IntVectorSet ReadIntegers(Stream stream, DataReadLimits? limits = null)
    {
        using var reader = new NpyReader(stream, leaveOpen: true, limits);
        return reader.ReadToEndAsIntegers();
    }

    /// <summary>Reads all rows of an integer .npy file (e.g. neighbour ids) as int32.</summary>
    /// <param name="path">The file path.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <returns>The rows.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is <see langword="null"/>.</exception>
    /// <exception cref="IOException">The file cannot be opened.</exception>
    /// <exception cref="DataFormatException">
    /// The file is malformed, unsupported, truncated or exceeds a limit, or an int64 value does not fit in int32.
    /// </exception>
    /// <exception cref="InvalidOperationException">The dtype is floating-point, or the data does not fit in one array.</exception>
    public static IntVectorSet ReadIntegers(string path, DataReadLimits? limits = null)
    {
        using NpyReader reader = NpyReader.Open(path, limits);
        return reader.ReadToEndAsIntegers();
    }

    /// <summary>Writes row-major float vectors as a (rows, <paramref name="dimension"/>) <c>&lt;f4</c> array.</summary>
    /// <param name="stream">The destination; left open.</param>
    /// <param name="data">The vectors, row after row.</param>
    /// <param name="dimension">The components per vector, at least 1.</param>
    /// <exception cref="ArgumentNullException"><paramref name="stream"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="dimension"/> is less than 1.</exception>
    /// <exception cref="ArgumentException">
    /// <paramref name="stream"/> cannot be written, or the length of <paramref name="data"/> is not a multiple of <paramref name="dimension"/>.
    /// </exception>
    public static void Write(Stream stream, ReadOnlySpan<float> data, int dimension)
    {
        int rows = CheckWrite(stream, data.Length, dimension);
        WriteHeader(stream, "<f4", $"({rows}, {dimension})");
        LittleEndianWriter.Write(stream, data);
    }

    /// <summary>Writes a vector set as a (Count, Dimension) <c>&lt;f4</c> array; an empty set of dimension 0 as shape (0,).</summary>
    /// <param name="stream">The destination; left open.</param>
    /// <param name="vectors">The vectors.</param>
    /// <exception cref="ArgumentNullException"><paramref name="stream"/> or <paramref name="vectors"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentException"><paramref name="stream"/> cannot be written.</exception>
    public static void Write(Stream stream, VectorSet vectors)
    {
        ArgumentNullException.ThrowIfNull(vectors);
        if (vectors.Dimension == 0)
        {
            DataFiles.CheckWritable(stream);
            WriteHeader(stream, "<f4", "(0,)");
            return;
        }

        Write(stream, vectors.Data, vectors.Dimension);
    }

    /// <summary>Writes a vector set to a .npy file, creating or replacing it atomically.</summary>
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
    public static void Write(string path, VectorSet vectors)
    {
        ArgumentNullException.ThrowIfNull(vectors);
        DataFiles.Replace(path, stream => Write(stream, vectors));
    }

    /// <summary>Writes row-major int32 rows as a (rows, <paramref name="dimension"/>) <c>&lt;i4</c> array.</summary>
    /// <param name="stream">The destination; left open.</param>
    /// <param name="data">The rows, one after another.</param>
    /// <param name="dimension">The values per row, at least 1.</param>
    /// <exception cref="ArgumentNullException"><paramref name="stream"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="dimension"/> is less than 1.</exception>
    /// <exception cref="ArgumentException">
    /// <paramref name="stream"/> cannot be written, or the length of <paramref name="data"/> is not a multiple of <paramref name="dimension"/>.
    /// </exception>
    public static void Write(Stream stream, ReadOnlySpan<int> data, int dimension)
    {
        int rows = CheckWrite(stream, data.Length, dimension);
        WriteHeader(stream, "<i4", $"({rows}, {dimension})");
        LittleEndianWriter.Write(stream, data);
    }

    /// <summary>Writes an int32 set as a (Count, Dimension) <c>&lt;i4</c> array; an empty set of dimension 0 as shape (0,).</summary>
    /// <param name="stream">The destination; left open.</param>
    /// <param name="rows">The rows.</param>
    /// <exception cref="ArgumentNullException"><paramref name="stream"/> or <paramref name="rows"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentException"><paramref name="stream"/> cannot be written.</exception>
    public static void Write(Stream stream, IntVectorSet rows)
    {
        ArgumentNullException.ThrowIfNull(rows);
        if (rows.Dimension == 0)
        {
            DataFiles.CheckWritable(stream);
            WriteHeader(stream, "<i4", "(0,)");
            return;
        }

        Write(stream, rows.Data, rows.Dimension);
    }

    /// <summary>Writes an int32 set to a .npy file, creating or replacing it atomically.</summary>
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
    public static void Write(string path, IntVectorSet rows)
    {
        ArgumentNullException.ThrowIfNull(rows);
        DataFiles.Replace(path, stream => Write(stream, rows));
    }

    private static void WriteHeader(Stream stream, string descr, string shape)
    {
        string dict = string.Create(CultureInfo.InvariantCulture, $"{{'descr': '{descr}', 'fortran_order': False, 'shape': {shape}, }}");

        // 10 preamble bytes (magic, version, uint16 length) + dict + spaces + '\n' must end on a 64-byte boundary.
        int unpadded = 10 + dict.Length + 1;
        int padding = (DataAlignment - (unpadded % DataAlignment)) % DataAlignment;
        string header = dict + new string(' ', padding) + "\n";

        Span<byte> preamble = stackalloc byte[10];
        NpyReader.Magic.CopyTo(preamble);
        preamble[6] = 1;
        preamble[7] = 0;
        BinaryPrimitives.WriteUInt16LittleEndian(preamble[8..], checked((ushort)header.Length));
        stream.Write(preamble);
        stream.Write(Encoding.ASCII.GetBytes(header));
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
