using System.Globalization;
using System.Text;

namespace VectorKit.IO;

/// <summary>
/// Reads and writes vectors as CSV text: one vector per line, values separated by
/// <see cref="CsvVectorOptions.Separator"/>, numbers in the invariant culture.
/// </summary>
/// <remarks>
/// Reading trims spaces and tabs around each value, skips blank lines, accepts <c>NaN</c>, <c>Infinity</c> and
/// <c>-Infinity</c>, and requires every line to have as many values as the first (a ragged line raises
/// <see cref="DataFormatException"/> with its line number). Line numbers in messages are 1-based and count the
/// header and blank lines. Writing uses the shortest text that parses back to the same float. Text with no data
/// lines reads as a set with no rows and dimension 0. Readers and writers passed in are left open.
/// </remarks>
public static class CsvVectors
{
    private const string Format = "CSV";

    /// <summary>Reads all vectors from CSV text.</summary>
    /// <param name="reader">The text source.</param>
    /// <param name="options">Separator and header; <see langword="null"/> for <see cref="CsvVectorOptions.Default"/>.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <param name="cancellationToken">Checked between lines.</param>
    /// <returns>The vectors.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="reader"/> is <see langword="null"/>.</exception>
    /// <exception cref="DataFormatException">A value is not a number, a line is ragged, or a limit is exceeded.</exception>
    /// <exception cref="InvalidOperationException">The data does not fit in one array.</exception>
    /// <exception cref="OperationCanceledException"><paramref name="cancellationToken"/> was cancelled.</exception>
    public static VectorSet Read(TextReader reader, CsvVectorOptions? options = null, DataReadLimits? limits = null, CancellationToken cancellationToken = default)
    {
        if (reader is null)
        {
            DataFormatThrow.ArgumentNull(nameof(reader));
        }

        options ??= CsvVectorOptions.Default;
        limits ??= DataReadLimits.Default;
        char separator = options.Separator;
        float[] data = new float[256];
        int length = 0;
        int dimension = 0;
        int rows = 0;
        int firstDataLine = 0;
        long lineNumber = 0;
        string? line;
        if (options.HasHeader)
        {
            lineNumber++;
            _ = reader.ReadLine();
        }

        while ((line = reader.ReadLine()) is not null)
        {
            lineNumber++;
            cancellationToken.ThrowIfCancellationRequested();
            if (string.IsNullOrWhiteSpace(line))
            {
                continue;
            }

            if (rows == limits.MaxRows)
            {
                DataFormatThrow.Malformed(Format, $"line {lineNumber}: more than {limits.MaxRows} rows (the limit)");
            }

            int fields = 0;
            ReadOnlySpan<char> rest = line;
            while (true)
            {
                int cut = rest.IndexOf(separator);
                ReadOnlySpan<char> field = (cut < 0 ? rest : rest[..cut]).Trim(" \t");
                fields++;
                if (!float.TryParse(field, NumberStyles.Float, CultureInfo.InvariantCulture, out float value))
                {
                    DataFormatThrow.Malformed(Format, $"line {lineNumber}, value {fields}: '{Shorten(field)}' is not a number");
                }

                if ((dimension != 0 && fields > dimension) || fields > limits.MaxDimension)
                {
                    break; // reported below with the full count
                }

                if (length == data.Length)
                {
                    if (length == Array.MaxLength)
                    {
                        DataFormatThrow.InvalidOperation($"{Format}: the data does not fit in one array.");
                    }

                    Array.Resize(ref data, (int)Math.Min(Array.MaxLength, 2L * length));
                }

                data[length++] = value;
                if (cut < 0)
                {
                    break;
                }

                rest = rest[(cut + 1)..];
            }

            if (fields > limits.MaxDimension)
            {
                DataFormatThrow.Malformed(Format, $"line {lineNumber} has more than {limits.MaxDimension} values (the dimension limit)");
            }

            if (dimension == 0)
            {
                dimension = fields;
                firstDataLine = (int)Math.Min(int.MaxValue, lineNumber);
            }
            else if (fields != dimension)
            {
                string count = fields > dimension ? $"more than {dimension}" : fields.ToString(CultureInfo.InvariantCulture);
                DataFormatThrow.Malformed(Format, $"line {lineNumber} has {count} values but line {firstDataLine} has {dimension}; every line must have the same number of values");
            }

            rows++;
        }

        Array.Resize(ref data, length);
        return new VectorSet(data, dimension);
    }

    /// <summary>Reads all vectors from a CSV file (UTF-8 or with a byte-order mark).</summary>
    /// <param name="path">The file path.</param>
    /// <param name="options">Separator and header; <see langword="null"/> for <see cref="CsvVectorOptions.Default"/>.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <param name="cancellationToken">Checked between lines.</param>
    /// <returns>The vectors.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is <see langword="null"/>.</exception>
    /// <exception cref="IOException">The file cannot be opened.</exception>
    /// <exception cref="DataFormatException">A value is not a number, a line is ragged, or a limit is exceeded.</exception>
    /// <exception cref="InvalidOperationException">The data does not fit in one array.</exception>
    /// <exception cref="OperationCanceledException"><paramref name="cancellationToken"/> was cancelled.</exception>
    public static VectorSet Read(string path, CsvVectorOptions? options = null, DataReadLimits? limits = null, CancellationToken cancellationToken = default)
    {
        using var reader = new StreamReader(DataFiles.OpenRead(path));
        return DataFiles.Named(path, () => Read(reader, options, limits, cancellationToken));
    }

    /// <summary>Writes row-major vectors as CSV, one line per vector.</summary>
    /// <param name="writer">The destination; left open.</param>
    /// <param name="data">The vectors, row after row.</param>
    /// <param name="dimension">The components per vector, at least 1.</param>
    /// <param name="options">Separator and header; <see langword="null"/> for <see cref="CsvVectorOptions.Default"/>.</param>
    /// <exception cref="ArgumentNullException"><paramref name="writer"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="dimension"/> is less than 1.</exception>
    /// <exception cref="ArgumentException">The length of <paramref name="data"/> is not a multiple of <paramref name="dimension"/>.</exception>
    public static void Write(TextWriter writer, ReadOnlySpan<float> data, int dimension, CsvVectorOptions? options = null)
    {
        if (writer is null)
        {
            DataFormatThrow.ArgumentNull(nameof(writer));
        }

        if (dimension < 1)
        {
            DataFormatThrow.ArgumentOutOfRange(nameof(dimension), dimension, "must be at least 1");
        }

        if (data.Length % dimension != 0)
        {
            DataFormatThrow.NotMultipleOfDimension(nameof(data), data.Length, dimension);
        }

        options ??= CsvVectorOptions.Default;
        char separator = options.Separator;
        if (options.HasHeader)
        {
            for (int j = 0; j < dimension; j++)
            {
                if (j > 0)
                {
                    writer.Write(separator);
                }

                writer.Write('x');
                writer.Write(j.ToString(CultureInfo.InvariantCulture));
            }

            writer.WriteLine();
        }

        // Longest shortest-round-trip float text is about 15 characters ("-1.17549435E-38").
        Span<char> text = stackalloc char[32];
        for (int i = 0; i < data.Length; i += dimension)
        {
            for (int j = 0; j < dimension; j++)
            {
                if (j > 0)
                {
                    writer.Write(separator);
                }

                data[i + j].TryFormat(text, out int written, default, CultureInfo.InvariantCulture);
                writer.Write(text[..written]);
            }

            writer.WriteLine();
        }
    }

    /// <summary>Writes a vector set as CSV, one line per vector; an empty set of dimension 0 writes nothing.</summary>
    /// <param name="writer">The destination; left open.</param>
    /// <param name="vectors">The vectors.</param>
    /// <param name="options">Separator and header; <see langword="null"/> for <see cref="CsvVectorOptions.Default"/>.</param>
    /// <exception cref="ArgumentNullException"><paramref name="writer"/> or <paramref name="vectors"/> is <see langword="null"/>.</exception>
    public static void Write(TextWriter writer, VectorSet vectors, CsvVectorOptions? options = null)
    {
        ArgumentNullException.ThrowIfNull(vectors);
        if (vectors.Dimension == 0)
        {
            ArgumentNullException.ThrowIfNull(writer);
            return;
        }

        Write(writer, vectors.Data, vectors.Dimension, options);
    }

    /// <summary>Writes a vector set to a CSV file (UTF-8, no byte-order mark), creating or replacing it atomically.</summary>
    /// <param name="path">The file path.</param>
    /// <param name="vectors">The vectors.</param>
    /// <param name="options">Separator and header; <see langword="null"/> for <see cref="CsvVectorOptions.Default"/>.</param>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> or <paramref name="vectors"/> is <see langword="null"/>.</exception>
    /// <remarks>
    /// The data goes to a hidden temporary file beside <paramref name="path"/>, which is flushed to the disk and renamed
    /// over it: the file at <paramref name="path"/> is the previous one or the complete new one, never a part. On
    /// failure the temporary file is deleted and the previous file is left as it was.
    /// </remarks>
    /// <exception cref="ArgumentException"><paramref name="path"/> is empty or names a folder.</exception>
    /// <exception cref="IOException">Creating, writing (on a full disk, say) or renaming the temporary file failed; the message names <paramref name="path"/> and the step.</exception>
    public static void Write(string path, VectorSet vectors, CsvVectorOptions? options = null)
    {
        ArgumentNullException.ThrowIfNull(vectors);
        DataFiles.Replace(path, stream =>
        {
            using var writer = new StreamWriter(stream, new UTF8Encoding(encoderShouldEmitUTF8Identifier: false), bufferSize: -1, leaveOpen: true);
            Write(writer, vectors, options);
        });
    }

    private static string Shorten(ReadOnlySpan<char> field) => field.Length <= 32 ? field.ToString() : string.Concat(field[..32], "...");
}
