using System.Buffers;
using System.Buffers.Binary;
using System.Runtime.InteropServices;

namespace VectorKit.IO;

/// <summary>
/// Reads the vectors of a data file in blocks of rows, so files larger than memory can be processed piece by
/// piece. The concrete readers are <see cref="VecsReader"/>, <see cref="NpyReader"/> and <see cref="IdxReader"/>.
/// </summary>
/// <remarks>
/// <para>
/// A reader parses and validates the header when it is created, then hands out rows in order. Every size the
/// header claims is checked against <see cref="DataReadLimits"/> and, when the stream's length is known, against
/// the bytes that remain, before anything is allocated. Data is read in chunks of 64 KiB and converted from
/// the file's byte order explicitly, whatever the machine's byte order.
/// </para>
/// <para>
/// A reader is not thread-safe. When it was created with <c>leaveOpen</c>, the position of the stream
/// afterwards is unspecified (the reader may buffer ahead).
/// </para>
/// </remarks>
public abstract class VectorReader : IDisposable
{
    private const int ChunkBytes = 1 << 16;

    // Growth start for ReadToEnd when the header's row count has not been checked against a known length:
    // memory then grows with the data actually present, never with what a header claims.
    private const int UnverifiedInitialElements = 1 << 20;

    private readonly Stream _source;
    private readonly bool _leaveOpen;
    private Stream _stream;
    private byte[]? _chunk;
    private long _offset;
    private long _endOffset;
    private bool _lengthVerified;
    private ElementKind _kind;
    private bool _bigEndian;
    private int _elementSize;
    private bool _rowPrefix;
    private bool _pendingPrefix;

    private protected VectorReader(Stream stream, bool leaveOpen, string formatName, DataReadLimits? limits)
    {
        if (stream is null)
        {
            DataFormatThrow.ArgumentNull(nameof(stream));
        }

        if (!stream.CanRead)
        {
            DataFormatThrow.Argument(nameof(stream), "The stream does not support reading.");
        }

        FormatName = formatName;
        Limits = limits ?? DataReadLimits.Default;
        _leaveOpen = leaveOpen;
        _endOffset = stream.CanSeek ? stream.Length - stream.Position : -1;

        // File and memory streams already serve small reads cheaply; anything else gets a buffer so the
        // per-row prefix reads of the vecs formats do not each reach the underlying source.
        _source = stream is FileStream or MemoryStream or BufferedStream ? stream : new BufferedStream(stream, ChunkBytes);
        _stream = _source;
        _chunk = ArrayPool<byte>.Shared.Rent(ChunkBytes);
        Count = -1;
    }

    /// <summary>The number of components of each vector; 0 only for an empty file that cannot state a dimension.</summary>
    public int Dimension { get; private set; }

    /// <summary>
    /// The number of vectors in the file, or -1 while it is unknown (a vecs file on a stream without a length;
    /// it becomes known when the end is reached).
    /// </summary>
    public long Count { get; private set; }

    /// <summary>The number of vectors read so far.</summary>
    public long RowsRead { get; private set; }

    /// <summary>
    /// Whether the file holds integers, which can be read exactly with <see cref="ReadBlock(Span{int}, CancellationToken)"/>.
    /// Floating-point files can be read only as floats.
    /// </summary>
    public bool IsIntegerData => ElementConverter.IsInteger(_kind);

    private protected string FormatName { get; }

    /// <summary>The file the reader opened itself (through <c>Open(path)</c>), named in its read errors; null for a caller's stream.</summary>
    internal string? SourcePath { get; set; }

    private protected DataReadLimits Limits { get; }

    /// <summary>The offset of the next byte to read, from where the reader started (in decompressed data for gzip).</summary>
    private protected long Offset => _offset;

    /// <summary>
    /// Reads as many whole vectors as fit in <paramref name="destination"/>, converted to float (integers above
    /// 2^24 in magnitude round to the nearest float).
    /// </summary>
    /// <param name="destination">Receives the vectors row-major; its length should be a multiple of <see cref="Dimension"/>.</param>
    /// <param name="cancellationToken">Checked between chunks.</param>
    /// <returns>The number of vectors written: 0 at the end of the data.</returns>
    /// <exception cref="ArgumentException"><paramref name="destination"/> is shorter than one vector.</exception>
    /// <exception cref="DataFormatException">The data is truncated or malformed.</exception>
    /// <exception cref="OperationCanceledException"><paramref name="cancellationToken"/> was cancelled.</exception>
    /// <exception cref="ObjectDisposedException">The reader has been disposed.</exception>
    public int ReadBlock(Span<float> destination, CancellationToken cancellationToken = default)
        => ReadRows(destination, cancellationToken);

    /// <summary>Reads as many whole vectors as fit in <paramref name="destination"/>, as int32 values.</summary>
    /// <param name="destination">Receives the vectors row-major; its length should be a multiple of <see cref="Dimension"/>.</param>
    /// <param name="cancellationToken">Checked between chunks.</param>
    /// <returns>The number of vectors written: 0 at the end of the data.</returns>
    /// <exception cref="ArgumentException"><paramref name="destination"/> is shorter than one vector.</exception>
    /// <exception cref="InvalidOperationException">The file holds floating-point data (<see cref="IsIntegerData"/> is false).</exception>
    /// <exception cref="DataFormatException">The data is truncated or malformed, or a 64-bit value does not fit in int32.</exception>
    /// <exception cref="OperationCanceledException"><paramref name="cancellationToken"/> was cancelled.</exception>
    /// <exception cref="ObjectDisposedException">The reader has been disposed.</exception>
    public int ReadBlock(Span<int> destination, CancellationToken cancellationToken = default)
        => ReadRows(destination, cancellationToken);

    /// <summary>Reads all remaining vectors into one <see cref="VectorSet"/>, converted to float.</summary>
    /// <param name="cancellationToken">Checked between chunks.</param>
    /// <returns>The remaining vectors.</returns>
    /// <exception cref="DataFormatException">The data is truncated or malformed.</exception>
    /// <exception cref="InvalidOperationException">The remaining data does not fit in one array.</exception>
    /// <exception cref="OperationCanceledException"><paramref name="cancellationToken"/> was cancelled.</exception>
    /// <exception cref="ObjectDisposedException">The reader has been disposed.</exception>
    public VectorSet ReadToEnd(CancellationToken cancellationToken = default)
        => new(ReadAll<float>(cancellationToken), Dimension);

    /// <summary>Reads all remaining vectors into one <see cref="IntVectorSet"/>.</summary>
    /// <param name="cancellationToken">Checked between chunks.</param>
    /// <returns>The remaining vectors.</returns>
    /// <exception cref="InvalidOperationException">
    /// The file holds floating-point data, or the remaining data does not fit in one array.
    /// </exception>
    /// <exception cref="DataFormatException">The data is truncated or malformed, or a 64-bit value does not fit in int32.</exception>
    /// <exception cref="OperationCanceledException"><paramref name="cancellationToken"/> was cancelled.</exception>
    /// <exception cref="ObjectDisposedException">The reader has been disposed.</exception>
    public IntVectorSet ReadToEndAsIntegers(CancellationToken cancellationToken = default)
        => new(ReadAll<int>(cancellationToken), Dimension);

    /// <summary>Reads all remaining rows as int64 values, row-major (for neighbour ids, which may exceed int32).</summary>
    internal long[] ReadToEndAsInt64(CancellationToken cancellationToken = default)
        => ReadAll<long>(cancellationToken);

    /// <summary>Enumerates the remaining vectors in blocks of up to <paramref name="rowsPerBlock"/> rows, each in a new array.</summary>
    /// <param name="rowsPerBlock">The most rows per block, at least 1.</param>
    /// <param name="cancellationToken">Checked between chunks.</param>
    /// <returns>A lazy sequence of blocks; the last may be shorter.</returns>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="rowsPerBlock"/> is less than 1 or a block would exceed the largest array.</exception>
    /// <exception cref="DataFormatException">The data is truncated or malformed (raised during enumeration).</exception>
    /// <exception cref="OperationCanceledException"><paramref name="cancellationToken"/> was cancelled (raised during enumeration).</exception>
    public IEnumerable<VectorSet> ReadBlocks(int rowsPerBlock, CancellationToken cancellationToken = default)
    {
        if (rowsPerBlock < 1 || (long)rowsPerBlock * Dimension > Array.MaxLength)
        {
            DataFormatThrow.ArgumentOutOfRange(nameof(rowsPerBlock), rowsPerBlock, "must be at least 1 and a block must fit in one array");
        }

        return Iterate(rowsPerBlock, cancellationToken);
    }

    /// <summary>Releases the read buffer and, unless the reader was created with <c>leaveOpen</c>, the stream.</summary>
    public void Dispose()
    {
        Dispose(true);
        GC.SuppressFinalize(this);
    }

    /// <summary>Releases resources.</summary>
    /// <param name="disposing">Whether this is called from <see cref="Dispose()"/>.</param>
    protected virtual void Dispose(bool disposing)
    {
        if (!disposing || _chunk is null)
        {
            return;
        }

        ArrayPool<byte>.Shared.Return(_chunk);
        _chunk = null;
        if (!ReferenceEquals(_stream, _source))
        {
            _stream.Dispose(); // a decompressor layered over _source; it leaves _source open
        }

        if (!_leaveOpen)
        {
            _source.Dispose();
        }
    }

    /// <summary>Replaces the stream being read, e.g. with a decompressor over it; offsets restart at 0.</summary>
    private protected void ReadThrough(Stream stream)
    {
        _stream = new BufferedStream(stream, ChunkBytes);
        _offset = 0;
        _endOffset = -1;
    }

    private protected Stream CurrentStream => _stream;

    /// <summary>Reads exactly <paramref name="destination"/>.Length header bytes or throws a truncation error.</summary>
    private protected void ReadHeader(Span<byte> destination, string what)
    {
        long start = _offset;
        int got = ReadUpTo(destination);
        if (got < destination.Length)
        {
            DataFormatThrow.Truncated(FormatName, what, start, destination.Length, got);
        }
    }

    /// <summary>Reads up to <paramref name="destination"/>.Length bytes; fewer only at the end of the stream.</summary>
    private protected int ReadUpTo(Span<byte> destination)
    {
        int got;
        try
        {
            got = _stream.ReadAtLeast(destination, destination.Length, throwOnEndOfStream: false);
        }
        catch (InvalidDataException ex)
        {
            // A decompressor reports corrupt input this way; to the caller it is just a malformed file.
            throw new DataFormatException($"{FormatName}: the compressed data is corrupt (near decompressed byte offset {_offset}).", ex);
        }

        _offset += got;
        return got;
    }

    /// <summary>The bytes left after the current offset, or -1 when the length is unknown.</summary>
    private protected long RemainingBytes => _endOffset < 0 ? -1 : _endOffset - _offset;

    /// <summary>
    /// Fixes the layout of the rows after the header; validates the claimed sizes against the limits and the bytes left.
    /// </summary>
    /// <param name="count">Rows claimed, or -1 when the file does not say.</param>
    /// <param name="dimension">Components per row.</param>
    /// <param name="kind">Element encoding.</param>
    /// <param name="bigEndian">Element byte order.</param>
    /// <param name="rowPrefixConsumed">
    /// True for the vecs layout: each row starts with its int32 dimension, and the first row's prefix has already been read.
    /// </param>
    private protected void SetLayout(long count, long dimension, ElementKind kind, bool bigEndian, bool rowPrefixConsumed)
    {
        if (dimension < 1 || dimension > Limits.MaxDimension)
        {
            DataFormatThrow.Malformed(FormatName, $"dimension {dimension} is outside the supported range 1..{Limits.MaxDimension}", _offset);
        }

        if (count < -1)
        {
            DataFormatThrow.Malformed(FormatName, $"row count {count} is negative", _offset);
        }

        int elementSize = ElementConverter.SizeOf(kind);
        if (count >= 0)
        {
            long rowBytes = checked((rowPrefixConsumed ? 4 : 0) + (dimension * elementSize));
            long total;
            try
            {
                total = checked(count * rowBytes);
            }
            catch (OverflowException)
            {
                DataFormatThrow.Malformed(FormatName, $"{count} rows of dimension {dimension} overflow a 64-bit byte count", _offset);
                throw;
            }

            if (_endOffset >= 0)
            {
                long remaining = _endOffset - _offset + (rowPrefixConsumed ? 4 : 0);
                if (total > remaining)
                {
                    DataFormatThrow.Malformed(
                        FormatName,
                        $"the header claims {count} rows of dimension {dimension} ({total} bytes of data) but only {remaining} bytes remain; the file is truncated",
                        _offset);
                }

                _lengthVerified = true;
            }

            if (count > Limits.MaxRows)
            {
                DataFormatThrow.Malformed(FormatName, $"the header claims {count} rows; the limit is {Limits.MaxRows}", _offset);
            }
        }

        Count = count;
        Dimension = (int)dimension;
        _kind = kind;
        _bigEndian = bigEndian;
        _elementSize = elementSize;
        _rowPrefix = rowPrefixConsumed;
        _pendingPrefix = rowPrefixConsumed;
    }

    /// <summary>Marks the reader as positioned at the end of an empty file (no rows, no dimension).</summary>
    private protected void SetEmpty()
    {
        Count = 0;
        Dimension = 0;
    }

    private IEnumerable<VectorSet> Iterate(int rowsPerBlock, CancellationToken cancellationToken)
    {
        while (true)
        {
            if (Dimension == 0)
            {
                yield break;
            }

            // Never allocate for rows the header says are not there, nor (when their presence is unchecked) far ahead of
            // the data: a hostile header must not turn a tiny file into rowsPerBlock × MaxDimension elements.
            long left = Count >= 0 ? Count - RowsRead : long.MaxValue;
            if (left <= 0)
            {
                yield break;
            }

            int wanted = (int)Math.Min(rowsPerBlock, left);
            int capacity = _lengthVerified ? wanted : (int)Math.Min(wanted, Math.Max(1, UnverifiedInitialElements / Dimension));
            var block = new float[capacity * Dimension];
            int rows = ReadRows<float>(block, cancellationToken);
            while (rows == capacity && capacity < wanted)
            {
                capacity = (int)Math.Min(wanted, 2L * capacity);
                Array.Resize(ref block, capacity * Dimension);
                int more = ReadRows(block.AsSpan(rows * Dimension), cancellationToken);
                if (more == 0)
                {
                    break;
                }

                rows += more;
            }

            if (rows == 0)
            {
                yield break;
            }

            if (rows < capacity)
            {
                Array.Resize(ref block, rows * Dimension);
            }

            yield return new VectorSet(block, Dimension);
        }
    }

    private T[] ReadAll<T>(CancellationToken cancellationToken)
        where T : unmanaged
    {
        ThrowIfDisposed();
        CheckTarget<T>();
        if (Dimension == 0)
        {
            return [];
        }

        long targetRows = Count >= 0 ? Count - RowsRead : long.MaxValue;
        long maxRows = Array.MaxLength / Dimension;
        if (Count >= 0 && targetRows > maxRows)
        {
            DataFormatThrow.InvalidOperation(
                $"{FormatName}: {targetRows} rows of dimension {Dimension} do not fit in one array; read them in blocks with ReadBlock.");
        }

        // A count checked against the stream length can be allocated at once; otherwise grow with the data.
        long capacityRows = _lengthVerified ? targetRows : Math.Min(targetRows, Math.Max(1, UnverifiedInitialElements / Dimension));
        var result = new T[checked((int)capacityRows * Dimension)];
        long filledRows = 0;
        while (filledRows < targetRows)
        {
            if (filledRows == capacityRows)
            {
                if (capacityRows == maxRows)
                {
                    DataFormatThrow.InvalidOperation(
                        $"{FormatName}: the data has more rows of dimension {Dimension} than fit in one array; read them in blocks with ReadBlock.");
                }

                capacityRows = Math.Min(Math.Min(targetRows, maxRows), capacityRows * 2);
                Array.Resize(ref result, checked((int)capacityRows * Dimension));
            }

            int rows = ReadRows(result.AsSpan(checked((int)filledRows * Dimension)), cancellationToken);
            if (rows == 0)
            {
                break;
            }

            filledRows += rows;
        }

        if (filledRows < capacityRows)
        {
            Array.Resize(ref result, checked((int)filledRows * Dimension));
        }

        return result;
    }

    private void CheckTarget<T>()
    {
        if ((typeof(T) == typeof(int) || typeof(T) == typeof(long)) && Dimension > 0 && !IsIntegerData)
        {
            DataFormatThrow.InvalidOperation($"{FormatName}: the file holds {_kind} values, which cannot be read as integers; read them as floats.");
        }
    }

    private int ReadRows<T>(Span<T> destination, CancellationToken cancellationToken)
        where T : unmanaged
    {
        try
        {
            return ReadRowsCore(destination, cancellationToken);
        }
        catch (DataFormatException e) when (DataFiles.NameFile(e, SourcePath))
        {
            throw; // not reached: the filter names the file and lets the exception pass
        }
    }

    private int ReadRowsCore<T>(Span<T> destination, CancellationToken cancellationToken)
        where T : unmanaged
    {
        ThrowIfDisposed();
        CheckTarget<T>();
        if (Dimension == 0 || (Count >= 0 && RowsRead >= Count))
        {
            return 0;
        }

        if (destination.Length < Dimension)
        {
            DataFormatThrow.Argument(nameof(destination), $"The destination holds {destination.Length} values, fewer than one vector of dimension {Dimension}.");
        }

        int maxRows = destination.Length / Dimension;
        if (!_rowPrefix)
        {
            // Rows are contiguous: read the whole block as one run of elements.
            int rows = (int)Math.Min(maxRows, Count - RowsRead);
            ReadElements(destination[..(rows * Dimension)], cancellationToken);
            RowsRead += rows;
            return rows;
        }

        int done = 0;
        while (done < maxRows && NextRowPrefix())
        {
            ReadElements(destination.Slice(done * Dimension, Dimension), cancellationToken);
            done++;
            RowsRead++;
        }

        return done;
    }

    /// <summary>Consumes and checks the int32 dimension that starts each vecs row; false at the end of the data.</summary>
    private bool NextRowPrefix()
    {
        if (Count >= 0 && RowsRead >= Count)
        {
            return false;
        }

        if (_pendingPrefix)
        {
            _pendingPrefix = false;
            return true;
        }

        Span<byte> prefix = stackalloc byte[4];
        long start = _offset;
        int got = ReadUpTo(prefix);
        if (got == 0 && Count < 0)
        {
            Count = RowsRead;
            return false;
        }

        if (got < 4)
        {
            DataFormatThrow.Truncated(FormatName, $"the dimension of row {RowsRead}", start, 4, got);
        }

        int d = BinaryPrimitives.ReadInt32LittleEndian(prefix);
        if (d != Dimension)
        {
            DataFormatThrow.RaggedRow(FormatName, RowsRead, Dimension, d, start);
        }

        return true;
    }

    private void ReadElements<T>(Span<T> destination, CancellationToken cancellationToken)
        where T : unmanaged
    {
        byte[] chunk = _chunk!;
        int perChunk = chunk.Length / _elementSize;
        long elementsDone = 0;
        while (!destination.IsEmpty)
        {
            cancellationToken.ThrowIfCancellationRequested();
            int n = Math.Min(destination.Length, perChunk);
            Span<byte> raw = chunk.AsSpan(0, n * _elementSize);
            long start = _offset;
            int got = ReadUpTo(raw);
            if (got < raw.Length)
            {
                long row = RowsRead + (_rowPrefix ? 0 : elementsDone / Dimension);
                DataFormatThrow.Truncated(FormatName, $"the values of row {row}", start, raw.Length, got);
            }

            if (typeof(T) == typeof(float))
            {
                ElementConverter.ToSingle(raw, _kind, _bigEndian, MemoryMarshal.Cast<T, float>(destination[..n]));
            }
            else if (typeof(T) == typeof(long))
            {
                ElementConverter.ToInt64(raw, _kind, _bigEndian, MemoryMarshal.Cast<T, long>(destination[..n]));
            }
            else
            {
                int bad = ElementConverter.ToInt32(raw, _kind, _bigEndian, MemoryMarshal.Cast<T, int>(destination[..n]));
                if (bad >= 0)
                {
                    DataFormatThrow.Malformed(FormatName, "a 64-bit value does not fit in int32", start + ((long)bad * _elementSize));
                }
            }

            destination = destination[n..];
            elementsDone += n;
        }
    }

    private void ThrowIfDisposed()
    {
        if (_chunk is null)
        {
            DataFormatThrow.Disposed(this);
        }
    }
}
