using System.Buffers.Binary;
using System.Globalization;
using System.Text;

namespace VectorKit.IO;

/// <summary>
/// Writes float32 rows to a .npy file as they arrive (for example the batches given to an index's
/// <c>AddRange</c>), so a collection larger than memory can be kept on disk for a <see cref="FileVectorSource"/>.
/// The row count is written into the header by <see cref="Complete"/>.
/// </summary>
/// <remarks>
/// The file is format version 1.0, <c>&lt;f4</c>, C order, shape (rows, dimension), with a fixed 128-byte header so
/// the data starts at byte 128 (a multiple of 64) and the final count fits in place. Until <see cref="Complete"/> the
/// header says 0 rows: a writer disposed without completing leaves a valid, empty array rather than a file whose
/// header promises rows that may be missing. Not thread-safe.
/// </remarks>
public sealed class NpyRowWriter : IDisposable
{
    private const int HeaderBytes = 128;
    private readonly FileStream _stream;
    private bool _completed;
    private bool _disposed;

    private NpyRowWriter(FileStream stream, int dimension)
    {
        _stream = stream;
        Dimension = dimension;
    }

    /// <summary>Components per row.</summary>
    public int Dimension { get; }

    /// <summary>Rows appended so far.</summary>
    public long RowsWritten { get; private set; }

    /// <summary>Creates (or replaces) a .npy file and writes its provisional header.</summary>
    /// <param name="path">The file path.</param>
    /// <param name="dimension">Components per row, at least 1.</param>
    /// <returns>A writer that owns the file.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="dimension"/> is less than 1.</exception>
    /// <exception cref="IOException">The file cannot be created.</exception>
    public static NpyRowWriter Create(string path, int dimension)
    {
        if (dimension < 1)
        {
            DataFormatThrow.ArgumentOutOfRange(nameof(dimension), dimension, "must be at least 1");
        }

        FileStream stream = DataFiles.Create(path);
        try
        {
            var writer = new NpyRowWriter(stream, dimension);
            writer.WriteHeader(0);
            return writer;
        }
        catch
        {
            stream.Dispose();
            throw;
        }
    }

    /// <summary>Appends whole rows.</summary>
    /// <param name="rows">Rows, one after another: a multiple of <see cref="Dimension"/> values.</param>
    /// <exception cref="ArgumentException">The length of <paramref name="rows"/> is not a multiple of <see cref="Dimension"/>.</exception>
    /// <exception cref="InvalidOperationException">The file was completed.</exception>
    /// <exception cref="ObjectDisposedException">The writer was disposed.</exception>
    public void Append(ReadOnlySpan<float> rows)
    {
        ThrowIfDone();
        if (rows.Length % Dimension != 0)
        {
            DataFormatThrow.NotMultipleOfDimension(nameof(rows), rows.Length, Dimension);
        }

        LittleEndianWriter.Write(_stream, rows);
        RowsWritten += rows.Length / Dimension;
    }

    /// <summary>Writes the row count into the header and flushes the file to disk; no rows can follow.</summary>
    /// <exception cref="InvalidOperationException">The file was completed already.</exception>
    /// <exception cref="ObjectDisposedException">The writer was disposed.</exception>
    public void Complete()
    {
        ThrowIfDone();
        _stream.Flush();
        _stream.Position = 0;
        WriteHeader(RowsWritten);
        _stream.Flush(flushToDisk: true);
        _completed = true;
    }

    /// <summary>Closes the file (a file not completed keeps its header of 0 rows).</summary>
    public void Dispose()
    {
        _disposed = true;
        _stream.Dispose();
    }

    private void WriteHeader(long rows)
    {
        string dict = string.Create(CultureInfo.InvariantCulture, $"{{'descr': '<f4', 'fortran_order': False, 'shape': ({rows}, {Dimension}), }}");

        // 10 preamble bytes + dict + spaces + newline = 128; the dict stays under 90 characters for any long count and int dimension.
        string header = dict.PadRight(HeaderBytes - 10 - 1) + "\n";
        Span<byte> bytes = stackalloc byte[HeaderBytes];
        NpyReader.Magic.CopyTo(bytes);
        bytes[6] = 1;
        bytes[7] = 0;
        BinaryPrimitives.WriteUInt16LittleEndian(bytes[8..], (ushort)header.Length);
        Encoding.ASCII.GetBytes(header, bytes[10..]);
        _stream.Write(bytes);
    }

    private void ThrowIfDone()
    {
        if (_disposed)
        {
            DataFormatThrow.Disposed(this);
        }

        if (_completed)
        {
            DataFormatThrow.InvalidOperation("The .npy file is complete: its header holds the final row count, so no rows can follow.");
        }
    }
}
