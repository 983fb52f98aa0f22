using System.Buffers.Binary;
using System.Globalization;
using System.Text;
using VectorKit.Internal;

namespace VectorKit.IO;

/// <summary>
/// Writes float32 rows to a .npy file as they arrive (for example the batches given to an index's
/// <c>AddRange</c>), so a collection larger than memory can be kept on disk for a <see cref="FileVectorSource"/>.
/// The row count is written into the header by <see cref="Complete"/>, which also puts the file in place.
/// </summary>
/// <remarks>
/// <para>The file is format version 1.0, <c>&lt;f4</c>, C order, shape (rows, dimension), with a fixed 128-byte header
/// so the data starts at byte 128 (a multiple of 64) and the final count fits in place.</para>
/// <para>The rows go to a hidden temporary file beside the target; <see cref="Complete"/> flushes it to the disk and
/// renames it over the target, so the file at the path is either the previous one or the complete new one. A writer
/// disposed without <see cref="Complete"/> (or whose write failed) deletes its temporary file and leaves any
/// previous file at the path untouched; it creates no file. (Earlier versions created the file at once and left an
/// empty array behind.)</para>
/// <para>Not thread-safe.</para>
/// </remarks>
public sealed class NpyRowWriter : IDisposable
{
    private const int HeaderBytes = 128;
    private readonly DurableFile _output;
    private readonly Stream _stream;
    private bool _completed;
    private bool _failed;
    private bool _disposed;

    private NpyRowWriter(DurableFile output, int dimension)
    {
        _output = output;
        _stream = output.Stream;
        Dimension = dimension;
    }

    /// <summary>Components per row.</summary>
    public int Dimension { get; }

    /// <summary>Rows appended so far.</summary>
    public long RowsWritten { get; private set; }

    /// <summary>Starts a .npy file that <see cref="Complete"/> creates (or replaces) at <paramref name="path"/>; until then the rows go to a temporary file beside it.</summary>
    /// <param name="path">The file path.</param>
    /// <param name="dimension">Components per row, at least 1.</param>
    /// <returns>A writer that owns the temporary file.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentException"><paramref name="path"/> is empty or names a folder.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="dimension"/> is less than 1.</exception>
    /// <exception cref="IOException">The temporary file cannot be created (the message names <paramref name="path"/>).</exception>
    public static NpyRowWriter Create(string path, int dimension)
    {
        if (dimension < 1)
        {
            DataFormatThrow.ArgumentOutOfRange(nameof(dimension), dimension, "must be at least 1");
        }

        DurableFile output = DataFiles.BeginReplace(path, nameof(path));
        try
        {
            var writer = new NpyRowWriter(output, dimension);
            output.Write(stream => writer.WriteHeader(0));
            return writer;
        }
        catch
        {
            output.Dispose();
            throw;
        }
    }

    /// <summary>Appends whole rows.</summary>
    /// <param name="rows">Rows, one after another: a multiple of <see cref="Dimension"/> values.</param>
    /// <exception cref="ArgumentException">The length of <paramref name="rows"/> is not a multiple of <see cref="Dimension"/>.</exception>
    /// <exception cref="InvalidOperationException">The file was completed, or an earlier write failed.</exception>
    /// <exception cref="ObjectDisposedException">The writer was disposed.</exception>
    /// <exception cref="IOException">Writing failed (a full disk, say); the message names the target, the temporary file is deleted and the previous file is left as it was.</exception>
    public void Append(ReadOnlySpan<float> rows)
    {
        ThrowIfDone();
        if (rows.Length % Dimension != 0)
        {
            DataFormatThrow.NotMultipleOfDimension(nameof(rows), rows.Length, Dimension);
        }

        try
        {
            LittleEndianWriter.Write(_stream, rows);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            _failed = true;
            throw _output.Failed(e);
        }

        RowsWritten += rows.Length / Dimension;
    }

    /// <summary>
    /// Writes the row count into the header, flushes the temporary file to the disk and renames it over the target
    /// (then flushes the folder, except on Windows); no rows can follow.
    /// </summary>
    /// <exception cref="InvalidOperationException">The file was completed already, or an earlier write failed.</exception>
    /// <exception cref="ObjectDisposedException">The writer was disposed.</exception>
    /// <exception cref="IOException">Writing, flushing or renaming failed; the message names the target and the step. The previous file is left as it was unless the message says the new file replaced it.</exception>
    public void Complete()
    {
        ThrowIfDone();
        _failed = true;
        _output.Write(stream =>
        {
            stream.Flush();
            stream.Position = 0;
            WriteHeader(RowsWritten);
        });
        _output.Commit();
        _failed = false;
        _completed = true;
    }

    /// <summary>Closes the writer. Without <see cref="Complete"/>, deletes the temporary file: the target is left as it was (absent, or the previous file).</summary>
    public void Dispose()
    {
        _disposed = true;
        _output.Dispose();
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

        if (_failed)
        {
            DataFormatThrow.InvalidOperation("An earlier write to the .npy file failed; its temporary file was deleted and no rows can follow.");
        }

        if (_completed)
        {
            DataFormatThrow.InvalidOperation("The .npy file is complete: its header holds the final row count, so no rows can follow.");
        }
    }
}
